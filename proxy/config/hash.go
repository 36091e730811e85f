package config

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"

	"github.com/goccy/go-yaml"
)

// Hash returns a short, stable fingerprint of the config after defaults:
// the first 16 hex digits of the SHA-256 of its canonical JSON encoding
// (fields in declaration order, map keys sorted, times in UTC). Two files
// that differ only in layout, comments, key order or in spelling out a
// default hash alike. The admin token's content is not part of it, only the
// file's name.
func (c *Config) Hash() string {
	n := *c
	n.ApplyDefaults()
	data, err := json.Marshal(&n)
	if err != nil {
		// Only NaN or infinite floats fail to encode as JSON, and Validate
		// rejects those; YAML can spell them, so the result stays stable.
		if data, err = yaml.Marshal(&n); err != nil {
			data = fmt.Appendf(nil, "unencodable: %v", err)
		}
	}
	sum := sha256.Sum256(data)
	return hex.EncodeToString(sum[:8])
}

package admin

import (
	"fmt"
	"net/url"
	"strings"

	"github.com/goccy/go-yaml"
)

// masked replaces every redacted value.
const masked = "xxxxx"

// secretName matches key and query-parameter names that hold secrets.
// (Common practice: there is no standard list of such names.)
func secretName(name string) bool {
	if strings.HasSuffix(name, "_file") {
		return false // a path to the secret, not the secret
	}
	n := strings.ToLower(name)
	for _, word := range [...]string{"token", "secret", "password", "passwd", "credential", "apikey", "api_key", "api-key", "signature"} {
		if strings.Contains(n, word) {
			return true
		}
	}
	return false
}

// Redact returns v as plain maps, slices and scalars under its YAML keys
// (so a config reads as in its file, durations as "200ms"), with secrets
// masked as "xxxxx": the value of every key whose name says it holds a
// secret (token, secret, password, credential, api key; but not *_file
// keys, which hold a path), the user information of every URL, and URL
// query parameters with such names.
func Redact(v any) (any, error) {
	b, err := yaml.Marshal(v)
	if err != nil {
		return nil, fmt.Errorf("admin: redact: encode as YAML: %w", err)
	}
	var tree any
	if err := yaml.Unmarshal(b, &tree); err != nil {
		return nil, fmt.Errorf("admin: redact: decode YAML: %w", err)
	}
	return redactTree(tree), nil
}

func redactTree(v any) any {
	switch t := v.(type) {
	case map[string]any:
		for k, e := range t {
			if secretName(k) && e != nil {
				t[k] = masked
				continue
			}
			t[k] = redactTree(e)
		}
	case []any:
		for i, e := range t {
			t[i] = redactTree(e)
		}
	case string:
		return redactURL(t)
	}
	return v
}

// redactURL masks a URL's user information and secret query parameters;
// any other string comes back unchanged.
func redactURL(s string) string {
	if !strings.Contains(s, "://") {
		return s
	}
	u, err := url.Parse(s)
	if err != nil || u.Host == "" {
		return s
	}
	changed := false
	if u.User != nil {
		// Like url.URL.Redacted, but a lone user name is masked too: it is
		// often a token.
		if _, hasPassword := u.User.Password(); hasPassword {
			u.User = url.UserPassword(u.User.Username(), masked)
		} else {
			u.User = url.User(masked)
		}
		changed = true
	}
	q := u.Query()
	queryChanged := false
	for k := range q {
		if secretName(k) {
			q.Set(k, masked)
			queryChanged = true
		}
	}
	if queryChanged {
		u.RawQuery = q.Encode()
	}
	if !changed && !queryChanged {
		return s
	}
	return u.String()
}

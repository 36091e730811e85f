package deploy

import (
	"net/url"
	"path"
	"strings"
	"testing"

	"riffle/store/open"
)

// TestFleetStore checks the fleet manifest: several replicas on one
// PostgreSQL database named by a URL without a password, the password
// handed over from a Secret, the server's certificate verified against a
// mounted CA, and no store volume in the pod.
func TestFleetStore(t *testing.T) {
	p := readPod(t, fleetManifest)
	if p.dep.Spec.Replicas < 2 {
		t.Errorf("replicas = %d; a fleet has several", p.dep.Spec.Replicas)
	}
	if !open.IsURL(p.cfg.Store) {
		t.Fatalf("store %q is not a postgres:// URL", p.cfg.Store)
	}
	u, err := url.Parse(p.cfg.Store)
	if err != nil {
		t.Fatalf("store: %v", err)
	}
	if _, set := u.User.Password(); set {
		t.Error("the store URL in the ConfigMap carries a password; it belongs in a Secret")
	}
	if h := u.Hostname(); h == "" || h == "localhost" || strings.HasPrefix(h, "127.") {
		t.Errorf("store host %q is not a database shared by the pods", h)
	}
	q := u.Query()
	if q.Get("sslmode") != "verify-full" {
		t.Errorf("store sslmode=%q; verify-full checks the server's certificate and name", q.Get("sslmode"))
	}
	if ca := q.Get("sslrootcert"); path.Dir(ca) != mountOf(t, p.rf, "db-ca") {
		t.Errorf("sslrootcert %q is not in the db-ca mount", ca)
	}
	for _, v := range p.dep.Spec.Template.Spec.Volumes {
		if v.EmptyDir != nil || v.Name == "store" {
			t.Errorf("volume %s: a fleet on a database keeps nothing in the pod", v.Name)
		}
	}
	checkPassword(t, p)
	checkConfigAndToken(t, fleetManifest, p)
}

// checkPassword checks that riffle gets the database password as
// PGPASSWORD from a key of a Secret in the manifest, and that the value
// does not also sit in the ConfigMap.
func checkPassword(t *testing.T, p pod) {
	t.Helper()
	for _, e := range p.rf.Env {
		if e.Name != "PGPASSWORD" {
			continue
		}
		if e.Value != "" || e.ValueFrom == nil || e.ValueFrom.SecretKeyRef == nil {
			t.Fatal("PGPASSWORD must come from a secretKeyRef, not a literal value")
		}
		ref := e.ValueFrom.SecretKeyRef
		secret, ok := p.objs["Secret/"+ref.Name]
		if !ok {
			t.Fatalf("PGPASSWORD names Secret %s, which the manifest does not define", ref.Name)
		}
		pw, ok := secret.StringData[ref.Key]
		if !ok || pw == "" {
			t.Fatalf("Secret %s has no key %s for PGPASSWORD", ref.Name, ref.Key)
		}
		if strings.Contains(p.raw, pw) {
			t.Error("the database password also sits in the ConfigMap")
		}
		return
	}
	t.Error("the riffle container gets no PGPASSWORD from a Secret")
}

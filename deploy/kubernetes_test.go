// Package deploy holds no Go code, only the tests that check the deployment
// files beside them: the Kubernetes manifest, the Prometheus scrape config,
// rules and their unit tests, and the dashboard.
package deploy

import (
	"bytes"
	"errors"
	"io"
	"net"
	"net/url"
	"os"
	"path"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/goccy/go-yaml"

	"riffle/proxy/config"
)

type port struct {
	Name          string `yaml:"name"`
	ContainerPort int    `yaml:"containerPort"`
}

type probe struct {
	HTTPGet struct {
		Path string `yaml:"path"`
		Port string `yaml:"port"`
	} `yaml:"httpGet"`
}

type envVar struct {
	Name      string `yaml:"name"`
	Value     string `yaml:"value"`
	ValueFrom *struct {
		SecretKeyRef *struct {
			Name string `yaml:"name"`
			Key  string `yaml:"key"`
		} `yaml:"secretKeyRef"`
	} `yaml:"valueFrom"`
}

type container struct {
	Name           string   `yaml:"name"`
	Image          string   `yaml:"image"`
	Args           []string `yaml:"args"`
	Env            []envVar `yaml:"env"`
	Ports          []port   `yaml:"ports"`
	LivenessProbe  *probe   `yaml:"livenessProbe"`
	ReadinessProbe *probe   `yaml:"readinessProbe"`
	VolumeMounts   []struct {
		Name      string `yaml:"name"`
		MountPath string `yaml:"mountPath"`
		SubPath   string `yaml:"subPath"`
	} `yaml:"volumeMounts"`
	Resources struct {
		Requests map[string]string `yaml:"requests"`
	} `yaml:"resources"`
}

type object struct {
	Kind     string `yaml:"kind"`
	Metadata struct {
		Name string `yaml:"name"`
	} `yaml:"metadata"`
	Data       map[string]string `yaml:"data"`
	StringData map[string]string `yaml:"stringData"`
	Spec       struct {
		Replicas int `yaml:"replicas"`
		Template struct {
			Spec struct {
				TerminationGracePeriodSeconds int         `yaml:"terminationGracePeriodSeconds"`
				Containers                    []container `yaml:"containers"`
				Volumes                       []struct {
					Name      string            `yaml:"name"`
					ConfigMap map[string]string `yaml:"configMap"`
					Secret    map[string]any    `yaml:"secret"`
					EmptyDir  map[string]any    `yaml:"emptyDir"`
				} `yaml:"volumes"`
			} `yaml:"spec"`
		} `yaml:"template"`
		Ports []struct {
			TargetPort string `yaml:"targetPort"`
		} `yaml:"ports"`
	} `yaml:"spec"`
}

// The manifests under kubernetes/: one pod with its own bbolt file, and a
// fleet on a shared PostgreSQL database.
const (
	sidecarManifest = "riffle-sidecar.yaml"
	fleetManifest   = "riffle-fleet.yaml"
)

// readManifest decodes every document of a manifest under kubernetes/ by
// kind; a kind that appears twice (two Secrets) is keyed kind/name too.
func readManifest(t *testing.T, file string) map[string]object {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("kubernetes", file))
	if err != nil {
		t.Fatal(err)
	}
	objs := map[string]object{}
	dec := yaml.NewDecoder(bytes.NewReader(b))
	for {
		var o object
		err := dec.Decode(&o)
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("%s: %v", file, err)
		}
		if o.Kind == "" {
			t.Fatalf("%s: a document without a kind", file)
		}
		if _, dup := objs[o.Kind]; !dup {
			objs[o.Kind] = o
		}
		objs[o.Kind+"/"+o.Metadata.Name] = o
	}
	for _, kind := range []string{"ConfigMap", "Secret", "Deployment", "Service", "NetworkPolicy"} {
		if _, ok := objs[kind]; !ok {
			t.Errorf("%s has no %s", file, kind)
		}
	}
	return objs
}

// validPortName checks an IANA service name as RFC 6335 section 5.1 (and so
// Kubernetes' port names) requires: 1 to 15 characters of a-z, 0-9 and
// hyphens, at least one letter, no hyphen first, last or next to another.
func validPortName(s string) bool {
	if len(s) == 0 || len(s) > 15 || s[0] == '-' || s[len(s)-1] == '-' || strings.Contains(s, "--") {
		return false
	}
	letter := false
	for _, c := range s {
		switch {
		case 'a' <= c && c <= 'z':
			letter = true
		case '0' <= c && c <= '9', c == '-':
		default:
			return false
		}
	}
	return letter
}

func TestPortNameRule(t *testing.T) {
	for name, want := range map[string]bool{"riffle-admin": true, "http": true, "h2c-1": true,
		"": false, "riffle-admin-port": false, "-x": false, "x-": false, "a--b": false, "8080": false, "Admin": false} {
		if got := validPortName(name); got != want {
			t.Errorf("validPortName(%q) = %v, want %v", name, got, want)
		}
	}
}

func findContainer(t *testing.T, d object, name string) container {
	t.Helper()
	for _, c := range d.Spec.Template.Spec.Containers {
		if c.Name == name {
			return c
		}
	}
	t.Fatalf("the Deployment's pod has no %s container", name)
	return container{}
}

func portOf(t *testing.T, c container, name string) int {
	t.Helper()
	for _, p := range c.Ports {
		if p.Name == name {
			return p.ContainerPort
		}
	}
	t.Fatalf("container %s has no port named %s", c.Name, name)
	return 0
}

func mountOf(t *testing.T, c container, volume string) string {
	t.Helper()
	for _, m := range c.VolumeMounts {
		if m.Name == volume {
			if m.SubPath != "" {
				t.Errorf("volume %s is mounted with subPath, which never sees ConfigMap or Secret updates", volume)
			}
			return m.MountPath
		}
	}
	t.Fatalf("container %s does not mount %s", c.Name, volume)
	return ""
}

func addrPort(t *testing.T, key, hostport string) int {
	t.Helper()
	_, p, err := net.SplitHostPort(hostport)
	if err != nil {
		t.Fatalf("riffle.yaml %s: %v", key, err)
	}
	n, err := strconv.Atoi(p)
	if err != nil {
		t.Fatalf("riffle.yaml %s: %v", key, err)
	}
	return n
}

// pod is the parts of the manifest the checks below look at.
type pod struct {
	objs      map[string]object
	dep       object
	rf, model container
	cfg       config.Config
	raw       string
}

func readPod(t *testing.T, file string) pod {
	t.Helper()
	p := pod{objs: readManifest(t, file)}
	p.dep = p.objs["Deployment"]
	p.rf = findContainer(t, p.dep, "riffle")
	p.model = findContainer(t, p.dep, "prediction-service")
	raw, ok := p.objs["ConfigMap"].Data["riffle.yaml"]
	if !ok {
		t.Fatal("the ConfigMap has no riffle.yaml")
	}
	p.raw = raw
	if err := yaml.UnmarshalWithOptions([]byte(raw), &p.cfg, yaml.Strict()); err != nil {
		t.Fatalf("the ConfigMap's riffle.yaml does not fit riffle's config keys: %v", err)
	}
	return p
}

// TestPodPorts checks each manifest's ports, probes and requests, and
// that the Service sends clients through riffle.
func TestPodPorts(t *testing.T) {
	for _, file := range []string{sidecarManifest, fleetManifest} {
		t.Run(file, func(t *testing.T) { checkPodPorts(t, readPod(t, file)) })
	}
}

func checkPodPorts(t *testing.T, p pod) {
	for _, c := range p.dep.Spec.Template.Spec.Containers {
		for _, pt := range c.Ports {
			if !validPortName(pt.Name) {
				t.Errorf("container %s: port name %q breaks RFC 6335 section 5.1", c.Name, pt.Name)
			}
		}
		if c.Resources.Requests["cpu"] == "" || c.Resources.Requests["memory"] == "" {
			t.Errorf("container %s requests no cpu or memory", c.Name)
		}
	}
	if got, want := addrPort(t, "admin", p.cfg.Admin), portOf(t, p.rf, "riffle-admin"); got != want {
		t.Errorf("admin listens on %d, the riffle-admin port is %d", got, want)
	}
	if got, want := addrPort(t, "listen", p.cfg.Listen), portOf(t, p.rf, "http"); got != want {
		t.Errorf("listen is on %d, the http port is %d", got, want)
	}
	for name, pr := range map[string]*probe{"/healthz": p.rf.LivenessProbe, "/readyz": p.rf.ReadinessProbe} {
		if pr == nil || pr.HTTPGet.Path != name || pr.HTTPGet.Port != "riffle-admin" {
			t.Errorf("probe %s: got %+v, want GET %s on port riffle-admin", name, pr, name)
		}
	}
	if svc := p.objs["Service"]; len(svc.Spec.Ports) == 0 || svc.Spec.Ports[0].TargetPort != "http" {
		t.Errorf("the Service must target riffle's http port, not the model server: %+v", svc.Spec.Ports)
	}
	for name, b := range map[string]config.Backend{"incumbent": p.cfg.Incumbent, "challenger": p.cfg.Challenger} {
		u, err := url.Parse(b.URL)
		if err != nil {
			t.Fatalf("%s.url: %v", name, err)
		}
		if n, _ := strconv.Atoi(u.Port()); n != portOf(t, p.model, name) || u.Hostname() != "127.0.0.1" {
			t.Errorf("%s.url %s is not the prediction service's %s port on the pod's loopback", name, b.URL, name)
		}
	}
}

// TestSidecarConfigAndVolumes checks that riffle keeps its store on the
// mounted store volume, and the parts both manifests share.
func TestSidecarConfigAndVolumes(t *testing.T) {
	p := readPod(t, sidecarManifest)
	if !strings.HasPrefix(p.cfg.Store, mountOf(t, p.rf, "store")+"/") {
		t.Errorf("store %s is not on the store volume", p.cfg.Store)
	}
	checkConfigAndToken(t, sidecarManifest, p)
}

// checkConfigAndToken checks that riffle reads the ConfigMap's file and
// finds its token in the mounted Secret, that the pod outlives its
// shutdown grace, and that riffle accepts the file.
func checkConfigAndToken(t *testing.T, file string, p pod) {
	t.Helper()
	want := []string{"serve", "--config", path.Join(mountOf(t, p.rf, "config"), "riffle.yaml")}
	if strings.Join(p.rf.Args, " ") != strings.Join(want, " ") {
		t.Errorf("riffle args %q, want %q", p.rf.Args, want)
	}
	secretDir := mountOf(t, p.rf, "admin-token")
	if path.Dir(p.cfg.AdminTokenFile) != secretDir {
		t.Errorf("admin_token_file %s is not in the Secret's mount %s", p.cfg.AdminTokenFile, secretDir)
	}
	secret := p.objs["Secret/"+secretOfVolume(t, p, "admin-token")]
	if _, ok := secret.StringData[path.Base(p.cfg.AdminTokenFile)]; !ok {
		t.Errorf("the Secret has no key %s for admin_token_file", path.Base(p.cfg.AdminTokenFile))
	}
	if grace := p.dep.Spec.Template.Spec.TerminationGracePeriodSeconds; float64(grace) <= p.cfg.ShutdownGrace.Seconds() {
		t.Errorf("terminationGracePeriodSeconds %d does not outlast shutdown_grace %s", grace, p.cfg.ShutdownGrace)
	}
	if p.cfg.Experiment.Name == "" || len(p.cfg.Routes) == 0 {
		t.Error("the ConfigMap's riffle.yaml names no experiment or route")
	}
	validateWithRiffle(t, file, p.raw)
}

// secretOfVolume returns the name of the Secret that the pod's volume
// mounts, failing when the volume is not a Secret.
func secretOfVolume(t *testing.T, p pod, volume string) string {
	t.Helper()
	for _, v := range p.dep.Spec.Template.Spec.Volumes {
		if v.Name == volume {
			if name, ok := v.Secret["secretName"].(string); ok {
				return name
			}
		}
	}
	t.Fatalf("the pod has no volume %s from a Secret", volume)
	return ""
}

// validateWithRiffle runs riffle's own config validation on the ConfigMap's
// file. The token file it names lives in the pod's Secret mount, not here,
// so the one problem allowed is that admin_token_file cannot be read.
func validateWithRiffle(t *testing.T, file, raw string) {
	t.Helper()
	_, err := config.Parse([]byte(raw), file+" ConfigMap riffle.yaml")
	if err == nil {
		return
	}
	var ce *config.Error
	if !errors.As(err, &ce) {
		t.Fatalf("config.Parse: %v", err)
	}
	for _, p := range ce.Problems {
		if p.Path != "admin_token_file" {
			t.Errorf("riffle rejects the ConfigMap's riffle.yaml: %s", p)
		}
	}
}

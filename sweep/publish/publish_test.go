package publish

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestTopics(t *testing.T) {
	for _, c := range []struct {
		topic, bench, run, kind string
		ok                      bool
	}{
		{StatusTopic("b1"), "b1", "", TopicStatus, true},
		{RunTopic("b1", "r-1", TopicState), "b1", "r-1", TopicState, true},
		{RunTopic("b1", "r-1", TopicPoints), "b1", "r-1", TopicPoints, true},
		{RunTopic("b1", "r-1", TopicResult), "b1", "r-1", TopicResult, true},
		{BlockTopic("b1", "r-1", 12), "b1", "r-1", TopicBlocks, true},
		{RunTopic("b1", "r-1", TopicBlocks) + "/012", "", "", "", false},
		{RunTopic("b1", "r-1", TopicBlocks) + "/-1", "", "", "", false},
		{RunTopic("b1", "r-1", "other"), "", "", "", false},
		{"rolloff/v2/benches/b1/status", "", "", "", false},
		{Root + "/status", "", "", "", false},
		{Root + "b1/runs//state", "", "", "", false},
	} {
		b, r, k, ok := ParseTopic(c.topic)
		if ok != c.ok || b != c.bench || r != c.run || k != c.kind {
			t.Errorf("ParseTopic(%q) = %q %q %q %v, want %q %q %q %v", c.topic, b, r, k, ok, c.bench, c.run, c.kind, c.ok)
		}
	}
}

func TestBenchID(t *testing.T) {
	for _, good := range []string{"bench-3", "lab_A.2", "x"} {
		if err := CheckBenchID(good); err != nil {
			t.Errorf("%q: %v", good, err)
		}
	}
	// MQTT wildcards and level separators (MQTT 3.1.1, 4.7) and
	// anything outside the id alphabet are refused.
	for _, bad := range []string{"", "a/b", "a+", "#", "-x", ".x", "é", strings.Repeat("a", 65), "a b"} {
		if err := CheckBenchID(bad); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
	for in, want := range map[string]string{
		"configs/bench-example.toml": "bench-example",
		"/etc/rolloff/Bench 2.toml":  "Bench-2",
		"demo":                       "demo",
		".hidden.toml":               "hidden",
		"../":                        "bench",
	} {
		got := BenchIDFromFile(in)
		if got != want || CheckBenchID(got) != nil {
			t.Errorf("BenchIDFromFile(%q) = %q, want %q", in, got, want)
		}
	}
}

func TestBrokerURL(t *testing.T) {
	for in, want := range map[string]string{
		"mqtt://127.0.0.1:1884": "tcp://127.0.0.1:1884",
		"mqtt://broker.lan":     "tcp://broker.lan:1883",
		"mqtts://broker.lan":    "ssl://broker.lan:8883",
		"mqtts://[::1]:9000":    "ssl://[::1]:9000",
	} {
		got, _, err := Broker{URL: in}.server()
		if err != nil || got != want {
			t.Errorf("%s: %q %v, want %q", in, got, err, want)
		}
	}
	for _, bad := range []string{"", "tcp://x:1", "http://x", "mqtt://user:pw@x:1", "mqtt://x:1/path", "mqtt://:1883", "mqtt://x:1?q=1"} {
		if err := (Broker{URL: bad}).Check(); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
	if err := (Broker{URL: "mqtt://x:1", CAFile: "ca.pem"}).Check(); err == nil {
		t.Error("a CA file on a plain mqtt:// URL accepted")
	}
	dir := t.TempDir()
	notPEM := filepath.Join(dir, "ca.pem")
	os.WriteFile(notPEM, []byte("not a certificate"), 0o600)
	if err := (Broker{URL: "mqtts://x:1", CAFile: notPEM}).Check(); err == nil || !strings.Contains(err.Error(), notPEM) {
		t.Errorf("a CA file without a certificate: %v", err)
	}
	if _, err := (Broker{URL: "mqtt://x:1", Password: "p"}).ClientOptions("c"); err == nil {
		t.Error("a password without a user accepted")
	}
}

func TestReadPasswordFile(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "pw")
	os.WriteFile(p, []byte("pa ss\r\nsecond line\n"), 0o600)
	if got, err := ReadPasswordFile(p); err != nil || got != "pa ss" {
		t.Errorf("got %q %v", got, err)
	}
	os.WriteFile(p, []byte("\n"), 0o600)
	if _, err := ReadPasswordFile(p); err == nil {
		t.Error("an empty first line accepted")
	}
	if _, err := ReadPasswordFile(filepath.Join(dir, "missing")); err == nil {
		t.Error("a missing file accepted")
	}
}

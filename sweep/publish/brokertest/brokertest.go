// Package brokertest starts a real MQTT broker (Debian's mosquitto) on
// a free loopback port for tests, with a generated configuration:
// plain or TLS with a test certificate authority, anonymous or with a
// user and password. A test is skipped with a message when the
// mosquitto binary is absent.
package brokertest

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"fmt"
	"math/big"
	"net"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"
)

// Opts chooses the broker's configuration.
type Opts struct {
	// TLS makes the listener mqtts, with a certificate for 127.0.0.1
	// signed by a CA made for the test (CAFile).
	TLS bool
	// User and Password, when set, are the only login accepted
	// (anonymous clients are refused).
	User, Password string
}

// Broker is a running mosquitto.
type Broker struct {
	t    testing.TB
	dir  string
	conf string
	port int
	tls  bool
	// CAFile is the test CA's certificate (TLS only).
	CAFile string

	mu     sync.Mutex
	cmd    *exec.Cmd
	exited chan struct{}
}

// Binary returns the mosquitto executable's path, or "" when absent.
func Binary() string {
	for _, p := range []string{"mosquitto", "/usr/sbin/mosquitto"} {
		if path, err := exec.LookPath(p); err == nil {
			return path
		}
	}
	return ""
}

// Start starts a broker for t and stops it when t ends. It skips t when
// mosquitto is not installed.
func Start(t testing.TB, o Opts) *Broker {
	t.Helper()
	bin := Binary()
	if bin == "" {
		t.Skip("mosquitto not installed (apt-get install mosquitto): MQTT tests skipped")
	}
	b := &Broker{t: t, dir: t.TempDir(), tls: o.TLS}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	b.port = ln.Addr().(*net.TCPAddr).Port
	ln.Close()
	var conf strings.Builder
	if u, err := user.Current(); err == nil {
		// mosquitto started as root changes to this user (default
		// "mosquitto", which could not read the test's files).
		fmt.Fprintf(&conf, "user %s\n", u.Username)
	}
	fmt.Fprintf(&conf, "persistence false\nset_tcp_nodelay true\nlog_dest stderr\nlog_type error\nlog_type warning\nlog_type notice\nlog_timestamp_format %%H:%%M:%%S\nlistener %d 127.0.0.1\n", b.port)
	if o.TLS {
		b.CAFile = b.makeCerts()
		fmt.Fprintf(&conf, "cafile %s\ncertfile %s\nkeyfile %s\n", b.CAFile,
			filepath.Join(b.dir, "server.crt"), filepath.Join(b.dir, "server.key"))
	}
	if o.User != "" {
		pw := filepath.Join(b.dir, "passwd")
		passwd, err := exec.LookPath("mosquitto_passwd")
		if err != nil {
			t.Skip("mosquitto_passwd not installed: MQTT password test skipped")
		}
		if out, err := exec.Command(passwd, "-b", "-c", pw, o.User, o.Password).CombinedOutput(); err != nil {
			t.Fatalf("mosquitto_passwd: %v\n%s", err, out)
		}
		fmt.Fprintf(&conf, "allow_anonymous false\npassword_file %s\n", pw)
	} else {
		conf.WriteString("allow_anonymous true\n")
	}
	b.conf = filepath.Join(b.dir, "mosquitto.conf")
	if err := os.WriteFile(b.conf, []byte(conf.String()), 0o600); err != nil {
		t.Fatal(err)
	}
	b.start(bin)
	t.Cleanup(b.Kill)
	return b
}

// URL is the broker's mqtt:// or mqtts:// URL.
func (b *Broker) URL() string {
	s := "mqtt"
	if b.tls {
		s = "mqtts"
	}
	return s + "://127.0.0.1:" + strconv.Itoa(b.port)
}

// Addr is the broker's host:port.
func (b *Broker) Addr() string { return "127.0.0.1:" + strconv.Itoa(b.port) }

func (b *Broker) start(bin string) {
	b.t.Helper()
	for try := 0; ; try++ {
		cmd := exec.Command(bin, "-c", b.conf)
		logf, err := os.OpenFile(filepath.Join(b.dir, "mosquitto.log"), os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o600)
		if err != nil {
			b.t.Fatal(err)
		}
		cmd.Stdout, cmd.Stderr = logf, logf
		if err := cmd.Start(); err != nil {
			logf.Close()
			b.t.Fatalf("mosquitto: %v", err)
		}
		logf.Close()
		exited := make(chan struct{})
		go func() { cmd.Wait(); close(exited) }()
		deadline := time.Now().Add(10 * time.Second)
		for time.Now().Before(deadline) {
			select {
			case <-exited:
				deadline = time.Time{}
				continue
			default:
			}
			if c, err := net.DialTimeout("tcp", b.Addr(), 200*time.Millisecond); err == nil {
				c.Close()
				b.mu.Lock()
				b.cmd, b.exited = cmd, exited
				b.mu.Unlock()
				return
			}
			time.Sleep(20 * time.Millisecond)
		}
		_ = cmd.Process.Kill()
		if try >= 20 {
			log, _ := os.ReadFile(filepath.Join(b.dir, "mosquitto.log"))
			b.t.Fatalf("mosquitto did not start on %s:\n%s", b.Addr(), log)
		}
		time.Sleep(250 * time.Millisecond) // the port may still be held by the previous one
	}
}

// Kill stops the broker with SIGKILL (nothing saved, nothing sent).
func (b *Broker) Kill() {
	b.mu.Lock()
	cmd, exited := b.cmd, b.exited
	b.cmd = nil
	b.mu.Unlock()
	if cmd != nil {
		_ = cmd.Process.Kill()
		select {
		case <-exited:
		case <-time.After(5 * time.Second):
		}
	}
}

// Restart starts the broker again on the same port after Kill.
func (b *Broker) Restart() {
	b.t.Helper()
	b.start(Binary())
}

// Log returns what the broker logged (errors and warnings, and
// notices when Verbose is set).
func (b *Broker) Log() string {
	data, _ := os.ReadFile(filepath.Join(b.dir, "mosquitto.log"))
	return string(data)
}

// Pid is the running broker's process id (0 when stopped).
func (b *Broker) Pid() int {
	b.mu.Lock()
	defer b.mu.Unlock()
	if b.cmd == nil {
		return 0
	}
	return b.cmd.Process.Pid
}

// makeCerts writes a test CA and a server certificate for 127.0.0.1
// signed by it, and returns the CA file.
func (b *Broker) makeCerts() string {
	t := b.t
	caKey, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	now := time.Now()
	caTmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "rolloff test CA"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(24 * time.Hour),
		IsCA: true, BasicConstraintsValid: true, KeyUsage: x509.KeyUsageCertSign | x509.KeyUsageCRLSign,
	}
	caDER, err := x509.CreateCertificate(rand.Reader, caTmpl, caTmpl, &caKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	ca, _ := x509.ParseCertificate(caDER)
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(2), Subject: pkix.Name{CommonName: "127.0.0.1"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(24 * time.Hour),
		IPAddresses: []net.IP{net.IPv4(127, 0, 0, 1)}, DNSNames: []string{"localhost"},
		KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &key.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	keyDER, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	write := func(name, typ string, der []byte) string {
		p := filepath.Join(b.dir, name)
		if err := os.WriteFile(p, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
			t.Fatal(err)
		}
		return p
	}
	write("server.crt", "CERTIFICATE", der)
	write("server.key", "EC PRIVATE KEY", keyDER)
	return write("ca.crt", "CERTIFICATE", caDER)
}

package publish

import (
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"net"
	"net/url"
	"os"
	"strings"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"
)

// Broker is where and how to reach the MQTT broker.
type Broker struct {
	// URL is mqtt://HOST:PORT (plain TCP, default port 1883) or
	// mqtts://HOST:PORT (TLS, default port 8883).
	URL string
	// CAFile is a PEM file of the certificate authorities that sign the
	// broker's certificate (mqtts only; default: the system's).
	CAFile string
	// User and Password authenticate to the broker; Password is usually
	// read from a file with ReadPasswordFile.
	User     string
	Password string
	// KeepAlive is the MQTT keep-alive (default 30 s): the broker
	// publishes the last will at most 1.5 times this after the client
	// stops answering (MQTT 3.1.1, 3.1.2.10).
	KeepAlive time.Duration
}

// DefaultKeepAlive is the keep-alive when Broker.KeepAlive is zero.
const DefaultKeepAlive = 30 * time.Second

// ReadPasswordFile reads a broker password: the file's first line,
// without its line ending.
func ReadPasswordFile(path string) (string, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return "", fmt.Errorf("broker password file: %w", err)
	}
	pw, _, _ := strings.Cut(string(data), "\n")
	pw = strings.TrimSuffix(pw, "\r")
	if pw == "" {
		return "", fmt.Errorf("broker password file %s: first line is empty", path)
	}
	return pw, nil
}

// server checks the broker URL and returns it in the form the client
// takes (tcp:// or ssl://) and whether it uses TLS.
func (b Broker) server() (string, bool, error) {
	u, err := url.Parse(b.URL)
	if err != nil {
		return "", false, fmt.Errorf("broker %q: %w", b.URL, err)
	}
	var scheme, port string
	switch u.Scheme {
	case "mqtt":
		scheme, port = "tcp", "1883"
	case "mqtts":
		scheme, port = "ssl", "8883"
	default:
		return "", false, fmt.Errorf("broker %q: want mqtt://HOST:PORT or mqtts://HOST:PORT", b.URL)
	}
	if u.Hostname() == "" || u.User != nil || (u.Path != "" && u.Path != "/") || u.RawQuery != "" || u.Fragment != "" {
		return "", false, fmt.Errorf("broker %q: want mqtt://HOST:PORT or mqtts://HOST:PORT (no user, path or query; credentials go in --broker-user and --broker-password-file)", b.URL)
	}
	if p := u.Port(); p != "" {
		port = p
	}
	if b.CAFile != "" && scheme != "ssl" {
		return "", false, fmt.Errorf("broker %q: a CA file is for mqtts:// only", b.URL)
	}
	return scheme + "://" + net.JoinHostPort(u.Hostname(), port), scheme == "ssl", nil
}

// Check reports a bad broker URL or an unreadable CA file.
func (b Broker) Check() error {
	_, tlsOn, err := b.server()
	if err != nil {
		return err
	}
	if tlsOn {
		_, err = b.tlsConfig()
	}
	return err
}

func (b Broker) tlsConfig() (*tls.Config, error) {
	cfg := &tls.Config{MinVersion: tls.VersionTLS12}
	if b.CAFile == "" {
		return cfg, nil
	}
	pem, err := os.ReadFile(b.CAFile)
	if err != nil {
		return nil, fmt.Errorf("broker CA file: %w", err)
	}
	pool := x509.NewCertPool()
	if !pool.AppendCertsFromPEM(pem) {
		return nil, fmt.Errorf("broker CA file %s: no PEM certificate in it", b.CAFile)
	}
	cfg.RootCAs = pool
	return cfg, nil
}

// ClientOptions returns the client options for the broker, with
// automatic reconnection, a clean session and the given client id.
func (b Broker) ClientOptions(clientID string) (*mqtt.ClientOptions, error) {
	srv, tlsOn, err := b.server()
	if err != nil {
		return nil, err
	}
	o := mqtt.NewClientOptions().AddBroker(srv).SetClientID(clientID)
	if tlsOn {
		cfg, err := b.tlsConfig()
		if err != nil {
			return nil, err
		}
		o.SetTLSConfig(cfg)
	}
	if b.User != "" {
		o.SetUsername(b.User)
	}
	if b.Password != "" {
		if b.User == "" {
			return nil, errors.New("broker: a password needs a user (--broker-user)")
		}
		o.SetPassword(b.Password)
	}
	ka := b.KeepAlive
	if ka <= 0 {
		ka = DefaultKeepAlive
	}
	o.SetKeepAlive(ka).SetPingTimeout(min(ka, 10*time.Second))
	o.SetCleanSession(true).SetAutoReconnect(true).SetConnectRetry(true)
	o.SetConnectRetryInterval(500 * time.Millisecond).SetMaxReconnectInterval(2 * time.Second)
	o.SetConnectTimeout(5 * time.Second).SetWriteTimeout(5 * time.Second)
	return o, nil
}

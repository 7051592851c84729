package sim

import (
	"bufio"
	"context"
	"net"
	"strconv"
	"strings"
	"testing"
	"time"
)

// quietConfig is the demo bench without noise, floor or hold, fast.
func quietConfig() Config {
	c := DemoConfig()
	c.TimeScale = 1000
	c.DUT.NoiseVrms = 0
	c.Converter.NoiseV = 0
	c.Converter.FloorFraction = 0
	c.Converter.HoldS = 0
	c.Voltmeter.NoiseV = 0
	c.DMM.NoiseV = 0
	c.DMM.FloorVrms = 0
	return c
}

func startBench(t testing.TB, cfg Config) *Bench {
	t.Helper()
	b, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	if err := b.Start(context.Background()); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	return b
}

// client is a raw SCPI client: net.Dial and bufio, nothing of rolloff's.
type client struct {
	t testing.TB
	c net.Conn
	r *bufio.Reader
}

func dial(t testing.TB, addr string) *client {
	t.Helper()
	c, err := net.Dial("tcp", strings.TrimPrefix(addr, "tcp://"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return &client{t: t, c: c, r: bufio.NewReader(c)}
}

func (c *client) send(msg string) {
	c.t.Helper()
	if _, err := c.c.Write([]byte(msg + "\n")); err != nil {
		c.t.Fatalf("send %q: %v", msg, err)
	}
}

// readLine returns one response line or the error.
func (c *client) readLine(timeout time.Duration) (string, error) {
	_ = c.c.SetReadDeadline(time.Now().Add(timeout))
	s, err := c.r.ReadString('\n')
	if err != nil {
		return s, err
	}
	return strings.TrimSuffix(s, "\n"), nil
}

func (c *client) query(msg string) string {
	c.t.Helper()
	c.send(msg)
	s, err := c.readLine(10 * time.Second)
	if err != nil {
		c.t.Fatalf("query %q: %v (got %q)", msg, err, s)
	}
	return s
}

func (c *client) float(msg string) float64 {
	c.t.Helper()
	s := c.query(msg)
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		c.t.Fatalf("query %q: %q is not a number", msg, s)
	}
	return v
}

func (c *client) floats(msg string) []float64 {
	c.t.Helper()
	s := c.query(msg)
	var out []float64
	for _, p := range strings.Split(s, ",") {
		v, err := strconv.ParseFloat(p, 64)
		if err != nil {
			c.t.Fatalf("query %q: %q is not a list of numbers", msg, s)
		}
		out = append(out, v)
	}
	return out
}

// noErrors checks the error queue is empty.
func (c *client) noErrors() {
	c.t.Helper()
	if e := c.query("SYST:ERR?"); e != `0,"No error"` {
		c.t.Errorf("error queue: %s", e)
	}
}

// waitModel sleeps for s model seconds.
func waitModel(b *Bench, s float64) {
	time.Sleep(time.Duration(s / b.TimeScale() * float64(time.Second)))
}

// do sends msg and waits until the instrument has executed it.
func (c *client) do(msg string) {
	c.t.Helper()
	c.send(msg)
	if got := c.query("*OPC?"); got != "1" {
		c.t.Fatalf("*OPC? after %q = %q", msg, got)
	}
}

package scpitest

import (
	"bufio"
	"net"
	"strings"
	"testing"
)

// TestListen talks to the stand-in over loopback: fixed replies, the
// error queue read oldest first then "No error" (SCPI-1999 Vol 2
// §21.8.8), silence for an unknown command, and the record of lines.
func TestListen(t *testing.T) {
	in := &Instrument{Term: "\r\n", Replies: map[string]string{"*IDN?": "rolloff,SIM-GEN,0001,1.0"},
		Errors: []string{`-113,"Undefined header"`}}
	addr := Listen(t, in)
	c, err := net.Dial("tcp", strings.TrimPrefix(addr, "tcp://"))
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	r := bufio.NewReader(c)
	for _, x := range []struct{ send, want string }{
		{"*IDN?\n", "rolloff,SIM-GEN,0001,1.0\r\n"},
		{"FOO\nsyst:err?\n", "-113,\"Undefined header\"\r\n"},
		{"SYSTem:ERRor:NEXT?\n", NoError + "\r\n"},
	} {
		if _, err := c.Write([]byte(x.send)); err != nil {
			t.Fatal(err)
		}
		got, err := r.ReadString('\n')
		if err != nil || got != x.want {
			t.Fatalf("%q: got %q, %v; want %q", x.send, got, err, x.want)
		}
	}
	if got := strings.Join(in.Received(), ""); got != "*IDN?\nFOO\nsyst:err?\nSYSTem:ERRor:NEXT?\n" {
		t.Errorf("received %q", got)
	}
}

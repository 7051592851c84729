package main

import (
	"bytes"
	"io"
	"net"
	"strings"
	"testing"
	"time"

	"github.com/creack/pty"

	"rolloff/internal/scpitest"
)

// probeInstrument answers *IDN? and an error queue holding one entry
// (SCPI-1999 Vol 2 §21.8) with replies ending in term, and records what it
// received.
func probeInstrument(term string) *scpitest.Instrument {
	return &scpitest.Instrument{Term: term,
		Replies: map[string]string{"*IDN?": "rolloff,SIM-GEN,0001,1.0"},
		Errors:  []string{`-113,"Undefined header"`}}
}

func runCLI(args ...string) (code int, stdout, stderr string) {
	var out, errOut bytes.Buffer
	code = realMain(args, strings.NewReader(""), &out, &errOut)
	return code, out.String(), errOut.String()
}

func TestProbeTCP(t *testing.T) {
	inst := probeInstrument("\n")
	addr := scpitest.Listen(t, inst)
	code, out, errOut := runCLI("probe", addr, "--timeout", "2s")
	if code != 0 {
		t.Fatalf("exit %d, stderr %q", code, errOut)
	}
	// IEEE 488.2 §10.14 fields, one per line, labelled.
	for _, want := range []string{
		"address:      " + addr + "\n", "transport:    tcp\n", "manufacturer: rolloff\n", "model:        SIM-GEN\n",
		"serial:       0001\n", "firmware:     1.0\n", `error:        -113 "Undefined header" (command error)` + "\n",
		"error queue:  1 entry read, now empty\n",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}
	if got := inst.Received(); strings.Join(got, "") != "*IDN?\nSYST:ERR?\nSYST:ERR?\n" {
		t.Errorf("instrument received %q", got)
	}
}

func TestProbeDeadAddress(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := "tcp://" + ln.Addr().String()
	ln.Close()
	code, out, errOut := runCLI("probe", "--timeout", "300ms", addr)
	if code == 0 || out != "" {
		t.Fatalf("exit %d, stdout %q; want a failure", code, out)
	}
	for _, want := range []string{addr, "tcp transport", "time-out 300ms", "cannot connect"} {
		if !strings.Contains(errOut, want) {
			t.Errorf("stderr %q lacks %q", errOut, want)
		}
	}
}

func TestProbeSilentInstrument(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	go func() {
		c, err := ln.Accept()
		if err == nil {
			defer c.Close()
			io.Copy(io.Discard, c)
		}
	}()
	addr := "tcp://" + ln.Addr().String()
	start := time.Now()
	code, _, errOut := runCLI("probe", addr, "--timeout=200ms")
	if code == 0 {
		t.Fatal("a silent instrument probed successfully")
	}
	for _, want := range []string{addr, "tcp transport", "time-out 200ms", "*IDN?", "timeout"} {
		if !strings.Contains(errOut, want) {
			t.Errorf("stderr %q lacks %q", errOut, want)
		}
	}
	if d := time.Since(start); d > 5*time.Second {
		t.Errorf("gave up after %v", d)
	}
}

func TestProbeSerialCRLF(t *testing.T) {
	m, s, err := pty.Open()
	if err != nil {
		t.Skipf("no pseudo-terminals: %v", err)
	}
	defer m.Close()
	defer s.Close()
	inst := probeInstrument("\r\n")
	go inst.Serve(m)
	code, out, errOut := runCLI("probe", "serial://"+s.Name()+"?baud=115200", "--write-term", `\r\n`, "--read-term", `\r\n`, "--timeout", "2s")
	if code != 0 {
		t.Fatalf("exit %d, stderr %q", code, errOut)
	}
	if !strings.Contains(out, "model:        SIM-GEN\n") || !strings.Contains(out, "transport:    serial\n") {
		t.Errorf("output:\n%s", out)
	}
	if got := inst.Received(); len(got) == 0 || got[0] != "*IDN?\r\n" {
		t.Errorf("instrument received %q, want CR LF terminated commands", got)
	}
}

func TestProbeUsage(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"probe"}, "exactly one ADDRESS"},
		{[]string{"probe", "tcp://a", "tcp://b"}, "exactly one ADDRESS"},
		{[]string{"probe", "gpib://7"}, `scheme "gpib"`},
		{[]string{"probe", "tcp://a", "--write-term", "x"}, `--write-term "x"`},
		{[]string{"probe", "tcp://a", "--read-term", `\t`}, `--read-term "\\t"`},
		{[]string{"probe", "tcp://a", "--timeout", "0s"}, "--timeout 0s"},
		{[]string{"probe", "tcp://a", "--bogus"}, "bogus"},
	} {
		code, _, errOut := runCLI(tc.args...)
		if code != 2 || !strings.Contains(errOut, tc.want) {
			t.Errorf("rolloff %q: exit %d, stderr %q; want 2 and %q", tc.args, code, errOut, tc.want)
		}
	}
	if code, _, _ := runCLI("probe", "-h"); code != 0 {
		t.Errorf("probe -h: exit %d", code)
	}
	for _, tc := range []struct{ in, want string }{{`\n`, "\n"}, {`\r\n`, "\r\n"}, {`\r`, "\r"}, {"\n", "\n"}} {
		if got, err := probeTerm("--read-term", tc.in); err != nil || got != tc.want {
			t.Errorf("probeTerm(%q) = %q, %v", tc.in, got, err)
		}
	}
}

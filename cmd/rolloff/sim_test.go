package main

import (
	"bufio"
	"context"
	"io"
	"regexp"
	"strings"
	"testing"
	"time"

	"rolloff/driver/scpi"
	"rolloff/driver/transport"
)

// TestSimCommand runs `rolloff sim` on the embedded demo bench, reads the
// address lines it prints, talks SCPI to the generator through the real
// transport, and stops it by cancelling its context.
func TestSimCommand(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	pr, pw := io.Pipe()
	env := &cmdEnv{log: newLogger(io.Discard, false, 0), stdout: pw, stderr: io.Discard, stdin: strings.NewReader("")}
	done := make(chan error, 1)
	go func() {
		err := runSim(ctx, env, []string{"--bench", "configs/sim-bench.toml", "--serial"})
		pw.Close()
		done <- err
	}()
	line := regexp.MustCompile(`^(generator|voltmeter|switch|dmm) (tcp://127\.0\.0\.1:\d+)$|^(generator-serial) (serial:///dev/\S+)$`)
	addrs := map[string]string{}
	sc := bufio.NewScanner(pr)
	for len(addrs) < 5 && sc.Scan() {
		m := line.FindStringSubmatch(sc.Text())
		if m == nil {
			t.Fatalf("unexpected line %q", sc.Text())
		}
		addrs[m[1]+m[3]] = m[2] + m[4]
	}
	if len(addrs) != 5 {
		t.Fatalf("addresses printed: %v", addrs)
	}
	go io.Copy(io.Discard, pr)
	qctx, qcancel := context.WithTimeout(ctx, 5*time.Second)
	defer qcancel()
	for _, addr := range []string{addrs["generator"], addrs["generator-serial"]} {
		conn, err := transport.Open(qctx, addr, transport.Opts{})
		if err != nil {
			t.Fatalf("%s: %v", addr, err)
		}
		sess := scpi.New(conn, nil)
		id, err := sess.Identify(qctx)
		if err != nil || id.Model != "SIM-GEN-1" {
			t.Errorf("%s: *IDN? = %+v, %v", addr, id, err)
		}
		sess.Close()
	}
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("rolloff sim returned %v after interrupt", err)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("rolloff sim did not stop on interrupt")
	}
}

func TestSimCommandNoSim(t *testing.T) {
	env := &cmdEnv{log: newLogger(io.Discard, false, 0), stdout: io.Discard, stderr: io.Discard, stdin: strings.NewReader("")}
	err := runSim(context.Background(), env, []string{"--bench", "configs/bench-example.toml"})
	if err == nil || !strings.Contains(err.Error(), "no [sim] table") {
		t.Errorf("rolloff sim on a real bench = %v, want a no-[sim] error", err)
	}
}

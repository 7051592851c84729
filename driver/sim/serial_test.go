package sim

import (
	"bufio"
	"os"
	"strings"
	"testing"
	"time"

	"go.bug.st/serial"
)

// A serial client on the pseudo-terminal's slave side, as a bench
// computer opens a USB-serial adapter.
func TestServeSerial(t *testing.T) {
	b := startBench(t, quietConfig())
	path, err := b.ServeSerial(RoleGenerator)
	if err != nil {
		t.Fatal(err)
	}
	port, err := serial.Open(path, &serial.Mode{BaudRate: 115200})
	if err != nil {
		t.Fatalf("open %s: %v", path, err)
	}
	if err := port.SetReadTimeout(2 * time.Second); err != nil {
		t.Fatal(err)
	}
	if _, err := port.Write([]byte("FREQ 4.5kHz\r\n*IDN?\n")); err != nil {
		t.Fatal(err)
	}
	r := bufio.NewReader(port)
	line, err := r.ReadString('\n')
	if err != nil || strings.TrimSpace(line) != b.Config().Generator.IDN {
		t.Errorf("*IDN? over the pty: %q, %v", line, err)
	}
	if b.FreqHz() != 4500 {
		t.Errorf("FREQ over the pty: %g Hz", b.FreqHz())
	}
	port.Close()

	// A plain file client (no termios of its own) works as well, since
	// the terminal is raw: nothing is echoed back.
	f, err := os.OpenFile(path, os.O_RDWR, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if _, err := f.WriteString("FREQ?\n"); err != nil {
		t.Fatal(err)
	}
	line, err = bufio.NewReader(f).ReadString('\n')
	if err != nil || line != "+4.50000000E+03\n" {
		t.Errorf("FREQ? = %q, %v", line, err)
	}
	if got := b.Received(RoleGenerator); len(got) != 3 || got[0] != "FREQ 4.5kHz" {
		t.Errorf("received %q", got)
	}
	// Close wakes the server blocked reading the terminal.
	done := make(chan struct{})
	go func() { b.Close(); close(done) }()
	select {
	case <-done:
	case <-time.After(3 * time.Second):
		t.Fatal("Close hung on the pty server")
	}
}

package sim_test

import (
	"bufio"
	"bytes"
	"context"
	"net/url"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"testing"
	"time"

	"rolloff/driver/sim"
)

// TestGeneralPurposeClient drives the simulated generator and voltmeter with
// PyVISA and its pure-Python backend (Debian's python3-pyvisa and
// python3-pyvisa-py), a general-purpose SCPI client library that knows
// nothing of rolloff: raw TCP sockets, "\n" terminators (IEEE 488.2 §7.5).
func TestGeneralPurposeClient(t *testing.T) {
	py := "/usr/bin/python3"
	if _, err := os.Stat(py); err != nil {
		t.Skip("no /usr/bin/python3: install python3-pyvisa python3-pyvisa-py")
	}
	if err := exec.Command(py, "-c", "import pyvisa, pyvisa_py").Run(); err != nil {
		t.Skip("PyVISA not installed: apt-get install python3-pyvisa python3-pyvisa-py")
	}
	cfg := sim.DemoConfig()
	cfg.Seed = 7
	b, err := sim.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	if err := b.Start(ctx); err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	if err := b.SelectRange(6); err != nil { // the 1 V range
		t.Fatal(err)
	}
	port := func(role string) string {
		u, err := url.Parse(b.Addr(role))
		if err != nil {
			t.Fatal(err)
		}
		return u.Port()
	}
	cmd := exec.CommandContext(ctx, py, "testdata/visa_client.py", port("generator"), port("voltmeter"))
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("PyVISA client: %v\n%s", err, stderr.String())
	}
	t.Logf("PyVISA client:\n%s", out)
	got := map[string]string{}
	sc := bufio.NewScanner(bytes.NewReader(out))
	for sc.Scan() {
		k, v, ok := strings.Cut(sc.Text(), "=")
		if ok {
			got[k] = v
		}
	}
	// *IDN? has four comma-separated fields (IEEE 488.2 §10.14).
	for _, k := range []string{"gen_idn", "dcv_idn"} {
		if n := len(strings.Split(got[k], ",")); n != 4 {
			t.Errorf("%s = %q: %d fields, want 4", k, got[k], n)
		}
	}
	if f, err := strconv.ParseFloat(got["gen_freq"], 64); err != nil || f != 1000 {
		t.Errorf("FREQ? = %q, want 1000", got["gen_freq"])
	}
	if got["gen_outp"] != "1" || got["gen_outp_off"] != "0" {
		t.Errorf("OUTP? = %q then %q, want 1 then 0", got["gen_outp"], got["gen_outp_off"])
	}
	// An unknown header queues -113 (SCPI-1999 Vol 2 §21.8.9), then the
	// queue reads 0,"No error".
	if !strings.HasPrefix(got["gen_err"], "-113,") {
		t.Errorf("SYST:ERR? after a bad header = %q, want -113,...", got["gen_err"])
	}
	if !strings.HasPrefix(got["gen_err2"], "0,") {
		t.Errorf("second SYST:ERR? = %q, want 0,\"No error\"", got["gen_err2"])
	}
	// 50 mVrms through the demo DUT's +20 dB at 1 kHz is 0.5 Vrms, which
	// reads 0.5 V on the converter's 1 V range (1 V DC at full scale). The
	// converter has had little time to settle, so only check the reading
	// is a finite number in the voltmeter's range.
	v, err := strconv.ParseFloat(got["dcv_read"], 64)
	if err != nil || v < 0 || v > 1.25 {
		t.Errorf("READ? = %q, want an NR3 reading in [0, 1.25] V", got["dcv_read"])
	}
	if b.OutputOn() {
		t.Error("generator output still on after OUTP OFF")
	}
}

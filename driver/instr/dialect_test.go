package instr

import (
	"errors"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"rolloff/driver"
	"rolloff/driver/profile"
	"rolloff/driver/scpi"
	"rolloff/driver/transport/replay"
)

// familyDMM and familyGen decode a shipped profile family with edits.
func familyDMM(t *testing.T, name string, edits ...string) *profile.DMM {
	t.Helper()
	d, err := profile.DecodeDMM(name, embedded(t, name, edits...))
	if err != nil {
		t.Fatal(err)
	}
	return d
}

func familyGen(t *testing.T, name string, edits ...string) *profile.Generator {
	t.Helper()
	g, err := profile.DecodeGenerator(name, embedded(t, name, edits...))
	if err != nil {
		t.Fatal(err)
	}
	return g
}

// dialectPlayback replays testdata/name through a session set up as the
// profile says (response table, common queries).
func dialectPlayback(t *testing.T, name string, opts *scpi.Opts) *scpi.Session {
	t.Helper()
	pb, err := replay.LoadPlayback(filepath.Join("testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	sess := scpi.New(pb, opts)
	t.Cleanup(func() {
		if err := sess.Close(); err != nil {
			t.Errorf("%s: %v", name, err)
		}
	})
	return sess
}

func TestDialectInitFetch(t *testing.T) {
	p := familyDMM(t, "dmm-initfetch.toml")
	v, err := NewDCVoltmeter(dialectPlayback(t, "dmm_initfetch.txt", profile.SessionOpts(p.Framing, p.Dialect, p.Response)), p)
	if err != nil {
		t.Fatal(err)
	}
	ctx := t.Context()
	if err := v.ConfigureDC(ctx, driver.DCConfig{RangeV: 1, Aperture: driver.Aperture{NPLC: 1}}); err != nil {
		t.Fatal(err)
	}
	if x, err := v.ReadDC(ctx); err != nil || x != 0.4991 {
		t.Fatalf("ReadDC = %v, %v", x, err)
	}
	if b, err := v.ReadBurst(ctx, 3); err != nil || len(b) != 3 || b[2] != 0.4999 {
		t.Fatalf("ReadBurst = %v, %v", b, err)
	}
}

func TestDialectMeasure(t *testing.T) {
	p := familyDMM(t, "dmm-measure.toml")
	v, err := NewDCVoltmeter(dialectPlayback(t, "dmm_measure.txt", profile.SessionOpts(p.Framing, p.Dialect, p.Response)), p)
	if err != nil {
		t.Fatal(err)
	}
	ctx := t.Context()
	// No configure, no range command: the range goes with the reading.
	if err := v.ConfigureDC(ctx, driver.DCConfig{RangeV: 5}); err != nil {
		t.Fatal(err)
	}
	if x, err := v.ReadDC(ctx); err != nil || x != 2.5 {
		t.Fatalf("ReadDC = %v, %v", x, err)
	}
	// SCPI-1999 Vol 2 §21.8.10: -230 is "Data corrupt or stale".
	_, err = v.ReadDC(ctx)
	if !errors.Is(err, driver.ErrTimeout) || !strings.Contains(err.Error(), "-230") || !strings.Contains(err.Error(), "dc.read") {
		t.Fatalf("timed-out reading = %v, want ErrTimeout naming dc.read and the instrument's -230", err)
	}
}

func TestDialectSuffixed(t *testing.T) {
	p := familyDMM(t, "dmm-suffixed.toml", "check_errors = true", "check_errors = false")
	sess := dialectPlayback(t, "dmm_suffixed.txt", profile.SessionOpts(p.Framing, p.Dialect, p.Response))
	v, err := NewDCVoltmeter(sess, p)
	if err != nil {
		t.Fatal(err)
	}
	ctx := t.Context()
	id, err := v.Identify(ctx)
	if err != nil || id.Model != "SIM-DCV-1" || id.Serial != "0001" || id.Firmware != "" {
		t.Fatalf("3-field identity = %+v, %v", id, err)
	}
	if x, err := v.ReadDC(ctx); err != nil || x != 0.1 {
		t.Fatalf("ReadDC with a unit = %v, %v", x, err)
	}
	if b, err := v.ReadBurst(ctx, 2); err != nil || len(b) != 2 || b[1] != 0.1001 {
		t.Fatalf("burst with a trailing comma = %v, %v", b, err)
	}
	// An overload word is a flagged reading: ErrOverload, never malformed.
	if _, err := v.ReadDC(ctx); !errors.Is(err, driver.ErrOverload) || driver.Transient(err) {
		t.Fatalf("OVLD = %v, want ErrOverload (not transient)", err)
	}
}

func TestDialectPlain(t *testing.T) {
	p := familyDMM(t, "dmm-plain.toml")
	v, err := NewDCVoltmeter(dialectPlayback(t, "dmm_plain.txt", profile.SessionOpts(p.Framing, p.Dialect, p.Response)), p)
	if err != nil {
		t.Fatal(err)
	}
	ctx := t.Context()
	if err := v.ConfigureDC(ctx, driver.DCConfig{RangeV: 1}); err != nil {
		t.Fatal(err)
	}
	// No integration-time command: asking for one is refused, nothing sent.
	if err := v.ConfigureDC(ctx, driver.DCConfig{RangeV: 1, Aperture: driver.Aperture{NPLC: 1}}); !errors.Is(err, driver.ErrOutOfRange) {
		t.Fatalf("NPLC on a meter without one = %v, want ErrOutOfRange", err)
	}
	if _, err := v.ReadBurst(ctx, 2); !errors.Is(err, driver.ErrOutOfRange) {
		t.Fatalf("burst on a meter without bursts = %v, want ErrOutOfRange", err)
	}
	if x, err := v.ReadDC(ctx); err != nil || x != 0.3162 {
		t.Fatalf("ReadDC = %v, %v", x, err)
	}
}

func TestDialectApplyVpp(t *testing.T) {
	p := familyGen(t, "generator-apply-vpp.toml")
	g, err := NewGenerator(dialectPlayback(t, "generator_apply_vpp.txt", profile.SessionOpts(p.Framing, p.Dialect, p.Response)), p, driver.GeneratorLimits{MaxVrms: 1})
	if err != nil {
		t.Fatal(err)
	}
	ctx := t.Context()
	if err := g.Setup(ctx); err != nil {
		t.Fatal(err)
	}
	if err := g.SetAmplitude(ctx, 0.05); err != nil {
		t.Fatal(err)
	}
	if err := g.SetFrequency(ctx, 2000); err != nil {
		t.Fatal(err)
	}
	// 0.0707106 Vpp into 50 Ω shown, hi-z DUT from a 50 Ω source: the
	// DUT gets 2 × 0.0707106/(2√2) Vrms — the value sent, recorded.
	want := 2 * 0.0707106 / (2 * math.Sqrt2)
	if got := g.SentAmplitudeVrms(); math.Abs(got/want-1) > 1e-12 || g.SentFrequencyHz() != 2000 {
		t.Fatalf("sent %g Vrms at %g Hz, want %g Vrms at 2000 Hz", got, g.SentFrequencyHz(), want)
	}
	if err := g.Halt(); err != nil {
		t.Fatal(err)
	}
}

func TestDialectOPCWait(t *testing.T) {
	p := familyGen(t, "generator-opc.toml")
	g, err := NewGenerator(dialectPlayback(t, "generator_opc.txt", profile.SessionOpts(p.Framing, p.Dialect, p.Response)), p, driver.GeneratorLimits{MaxVrms: 1})
	if err != nil {
		t.Fatal(err)
	}
	if err := g.SetFrequency(t.Context(), 1234.5678); err != nil {
		t.Fatal(err)
	}
	if g.SentFrequencyHz() != 1234.57 {
		t.Fatalf("SentFrequencyHz = %v, want the 6-digit 1234.57", g.SentFrequencyHz())
	}
}

func TestDialectHaltByReadback(t *testing.T) {
	p2, err := profile.DecodeGenerator("x.toml", append(embedded(t, "generator-scpi.toml", "check_errors = true", "check_errors = false",
		`query_amplitude = ""`, "query_amplitude = \"\"\nquery_output = \"OUTPut?\""), []byte("\n[dialect]\nopc_query = \"\"\n")...))
	if err != nil {
		t.Fatal(err)
	}
	g, err := NewGenerator(dialectPlayback(t, "generator_halt_readback.txt", profile.SessionOpts(p2.Framing, p2.Dialect, p2.Response)), p2, driver.GeneratorLimits{MaxVrms: 1})
	if err != nil {
		t.Fatal(err)
	}
	if err := g.Halt(); err != nil {
		t.Fatal(err)
	}
}

package instr

import (
	"context"
	"errors"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"rolloff/configs"
	"rolloff/driver"
	"rolloff/driver/profile"
	"rolloff/driver/scpi"
	"rolloff/driver/transport/replay"
)

// embedded returns an embedded profile with text replacements applied
// (pairs of old, new; each old must be present).
func embedded(t *testing.T, name string, edits ...string) []byte {
	t.Helper()
	data, err := configs.ReadFile(name)
	if err != nil {
		t.Fatal(err)
	}
	s := string(data)
	for i := 0; i+1 < len(edits); i += 2 {
		if !strings.Contains(s, edits[i]) {
			t.Fatalf("%s: %q not found", name, edits[i])
		}
		s = strings.Replace(s, edits[i], edits[i+1], 1)
	}
	return []byte(s)
}

func genProfile(t *testing.T, edits ...string) *profile.Generator {
	t.Helper()
	g, err := profile.DecodeGenerator("generator-scpi.toml", embedded(t, "generator-scpi.toml", edits...))
	if err != nil {
		t.Fatal(err)
	}
	return g
}

func dmmProfile(t *testing.T, edits ...string) *profile.DMM {
	t.Helper()
	d, err := profile.DecodeDMM("dmm-scpi.toml", embedded(t, "dmm-scpi.toml", edits...))
	if err != nil {
		t.Fatal(err)
	}
	return d
}

// playback opens a session replaying testdata/name; at the end of the
// test every exchange must have been used, byte for byte.
func playback(t *testing.T, name string) *scpi.Session {
	t.Helper()
	pb, err := replay.LoadPlayback(filepath.Join("testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	sess := scpi.New(pb, nil)
	t.Cleanup(func() {
		if err := sess.Close(); err != nil {
			t.Errorf("%s: %v", name, err)
		}
	})
	return sess
}

// empty is a session on an empty transcript: any traffic fails the test.
func empty(t *testing.T) *scpi.Session {
	t.Helper()
	tr, err := replay.ParseString("empty", "")
	if err != nil {
		t.Fatal(err)
	}
	sess := scpi.New(replay.NewPlayback(tr), nil)
	t.Cleanup(func() {
		if err := sess.Close(); err != nil {
			t.Errorf("traffic on a refused call: %v", err)
		}
	})
	return sess
}

var bench = driver.GeneratorLimits{MinFreqHz: 10, MaxFreqHz: 200e3, MaxVrms: 1}

func TestGeneratorGenericTranscript(t *testing.T) {
	ctx := context.Background()
	g, err := NewGenerator(playback(t, "generator_generic.txt"), genProfile(t), bench)
	if err != nil {
		t.Fatal(err)
	}
	if err := g.Setup(ctx); err != nil {
		t.Fatal(err)
	}
	if err := g.SetFrequency(ctx, 1000); err != nil {
		t.Fatal(err)
	}
	if err := g.SetAmplitude(ctx, 0.5); err != nil {
		t.Fatal(err)
	}
	if err := g.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	// Halt takes no context: it works after the caller's is cancelled.
	if err := g.Halt(); err != nil {
		t.Fatal(err)
	}
}

// TestGeneratorLimits: the tighter of instrument (20 MHz, 7.07 Vrms) and
// bench (200 kHz, 1 Vrms) applies, and a refused setting sends nothing.
func TestGeneratorLimits(t *testing.T) {
	ctx := context.Background()
	g, err := NewGenerator(empty(t), genProfile(t), bench)
	if err != nil {
		t.Fatal(err)
	}
	want := driver.GeneratorLimits{MinFreqHz: 10, MaxFreqHz: 200e3, MinVrms: 0, MaxVrms: 1}
	if g.Limits() != want {
		t.Errorf("Limits() = %+v, want %+v", g.Limits(), want)
	}
	for _, f := range []float64{5, 200.001e3, 30e6, math.NaN(), math.Inf(1)} {
		if err := g.SetFrequency(ctx, f); !errors.Is(err, driver.ErrOutOfRange) {
			t.Errorf("SetFrequency(%g) = %v, want ErrOutOfRange", f, err)
		}
	}
	for _, v := range []float64{1.0001, -0.1, 5, math.NaN()} {
		if err := g.SetAmplitude(ctx, v); !errors.Is(err, driver.ErrOutOfRange) {
			t.Errorf("SetAmplitude(%g) = %v, want ErrOutOfRange", v, err)
		}
	}
	// A bench wider than the instrument is narrowed to the instrument.
	g2, err := NewGenerator(empty(t), genProfile(t), driver.GeneratorLimits{MinFreqHz: 0, MaxFreqHz: 1e9, MaxVrms: 50})
	if err != nil {
		t.Fatal(err)
	}
	if l := g2.Limits(); l.MaxFreqHz != 20e6 || l.MaxVrms != 7.07 {
		t.Errorf("Limits() = %+v, want the instrument's 20 MHz and 7.07 Vrms", l)
	}
	// Limits that leave nothing are refused.
	if _, err := NewGenerator(empty(t), genProfile(t), driver.GeneratorLimits{MinFreqHz: 30e6, MaxFreqHz: 40e6, MaxVrms: 1}); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("disjoint frequency limits: %v, want ErrOutOfRange", err)
	}
}

// TestGeneratorVppLoad pins a Vpp dialect with a 50 Ω load setting driving
// a hi-z DUT: the DUT gets twice what the instrument shows, so rolloff
// sets half. Vpp = 2√2·Vrms for a sine (handbook formula).
func TestGeneratorVppLoad(t *testing.T) {
	p := genProfile(t, `unit = "vrms"`, `unit = "vpp"`, `load = "hi-z"`, `load = 50`, `check_errors = true`, `check_errors = false`,
		`max_amplitude = 7.07`, `max_amplitude = 20`)
	ctx := context.Background()
	g, err := NewGenerator(playback(t, "generator_vpp_50ohm.txt"), p, bench)
	if err != nil {
		t.Fatal(err)
	}
	if err := g.Setup(ctx); err != nil {
		t.Fatal(err)
	}
	if err := g.SetAmplitude(ctx, 1); err != nil {
		t.Fatal(err)
	}
	// 20 Vpp shown across a 50 Ω load setting is 40 Vpp open circuit:
	// 14.14 Vrms at a hi-z DUT.
	if got := p.MaxVrms(); math.Abs(got-20/math.Sqrt2) > 1e-12 {
		t.Errorf("MaxVrms = %g, want 20 Vpp shown into 50 Ω = %g Vrms at a hi-z DUT", got, 20/math.Sqrt2)
	}
}

func TestGeneratorDBm(t *testing.T) {
	p := genProfile(t, `unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = \"load\"", `load = "hi-z"`, `load = 50`, `dut_load = "hi-z"`, `dut_load = 50`,
		`check_errors = true`, `check_errors = false`, `min_amplitude = 0.0`, `min_amplitude = -60.0`, `max_amplitude = 7.07`, `max_amplitude = 23.0`)
	ctx := context.Background()
	g, err := NewGenerator(playback(t, "generator_dbm.txt"), p, bench)
	if err != nil {
		t.Fatal(err)
	}
	if err := g.Setup(ctx); err != nil {
		t.Fatal(err)
	}
	if err := g.SetAmplitude(ctx, 1); err != nil {
		t.Fatal(err)
	}
	// dBm = 10·log10(P / 1 mW), P = V²/R (handbook formula): 1 Vrms into
	// 50 Ω is 20 mW, 13.0103 dBm.
	if got := g.InstrumentAmplitude(1); math.Abs(got-13.0103) > 5e-5 {
		t.Errorf("1 Vrms into 50 Ω = %g dBm, want 13.0103", got)
	}
	// 0 dBm into
	// 50 Ω is 0.2236 Vrms (common practice figure).
	if got := g.InstrumentAmplitude(math.Sqrt(50e-3)); math.Abs(got) > 1e-12 {
		t.Errorf("%g Vrms into 50 Ω = %g dBm, want 0", math.Sqrt(50e-3), got)
	}
	// +23 dBm into 50 Ω = 10^(2.3) mW = 199.5 mW → 3.159 Vrms, capped
	// by the bench's 1 Vrms.
	if got, want := p.MaxVrms(), math.Sqrt(math.Pow(10, 2.3)*1e-3*50); math.Abs(got-want) > 1e-12 {
		t.Errorf("MaxVrms = %g, want %g", got, want)
	}
	if g.Limits().MaxVrms != 1 {
		t.Errorf("Limits().MaxVrms = %g, want the bench's 1", g.Limits().MaxVrms)
	}
}

// TestLoadConversion checks the source/load arithmetic against the
// voltage-divider formula (handbook): Vload = E·R/(R+Rs).
func TestLoadConversion(t *testing.T) {
	for _, c := range []struct {
		load, dut   string
		shownPerDUT float64
	}{
		{`"hi-z"`, `"hi-z"`, 1},          // nothing divides
		{`50`, `"hi-z"`, 0.5},            // shows half of what the DUT gets (it "shows double" the other way)
		{`50`, `50`, 1},                  // matched: shown = at the DUT
		{`"hi-z"`, `50`, 2},              // told hi-z, loaded by 50 Ω: EMF is twice the DUT voltage
		{`600`, `600`, 1},                // matched at 600 Ω
		{`50`, `600`, 650.0 / 600 * 0.5}, // E = Vdut·650/600, shown = E·50/100
	} {
		p := genProfile(t, `load = "hi-z"`, `load = `+c.load, `dut_load = "hi-z"`, `dut_load = `+c.dut)
		if got := p.Output.ShownVrms(1); math.Abs(got-c.shownPerDUT) > 1e-12 {
			t.Errorf("load %s, DUT %s: shown %g per Vrms at the DUT, want %g", c.load, c.dut, got, c.shownPerDUT)
		}
		if back := p.Output.DUTVrms(p.Output.ShownVrms(0.3)); math.Abs(back-0.3) > 1e-12 {
			t.Errorf("load %s, DUT %s: DUTVrms(ShownVrms(0.3)) = %g", c.load, c.dut, back)
		}
	}
}

func TestGeneratorErrorQueue(t *testing.T) {
	g, err := NewGenerator(playback(t, "generator_error_queue.txt"), genProfile(t), bench)
	if err != nil {
		t.Fatal(err)
	}
	err = g.SetFrequency(context.Background(), 150e3)
	if !errors.Is(err, driver.ErrInstrument) {
		t.Fatalf("SetFrequency with an error queued = %v, want ErrInstrument", err)
	}
	for _, s := range []string{"commands.set_frequency", "SOURce:FREQuency 150000", "-222"} {
		if !strings.Contains(err.Error(), s) {
			t.Errorf("error %q does not name %q", err, s)
		}
	}
}

func TestIdentityAndClear(t *testing.T) {
	g, err := NewGenerator(playback(t, "identity.txt"), genProfile(t), bench)
	if err != nil {
		t.Fatal(err)
	}
	id, err := g.Identify(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if id.Manufacturer != "rolloff" || id.Model != "SIM-GEN" || id.Serial != "0001" || id.Firmware != "1.0" {
		t.Errorf("Identify = %+v", id)
	}
	if errs, err := g.Clear(context.Background()); err != nil || len(errs) != 0 {
		t.Errorf("Clear = %v, %v", errs, err)
	}
}

func TestDCVoltmeterTranscript(t *testing.T) {
	ctx := context.Background()
	v, err := NewDCVoltmeter(playback(t, "dmm_dc.txt"), dmmProfile(t))
	if err != nil {
		t.Fatal(err)
	}
	// 1.05 V (the converter's over-range output) fits the 1 V range with
	// the profile's 1.2 headroom.
	if err := v.ConfigureDC(ctx, driver.DCConfig{RangeV: 1.05, Aperture: driver.Aperture{NPLC: 1}}); err != nil {
		t.Fatal(err)
	}
	if v.RangeV() != 1 {
		t.Errorf("RangeV = %g, want 1", v.RangeV())
	}
	x, err := v.ReadDC(ctx)
	if err != nil || x != 0.9487 {
		t.Errorf("ReadDC = %g, %v; want 0.9487", x, err)
	}
	b, err := v.ReadBurst(ctx, 4)
	if err != nil || len(b) != 4 || b[1] != 0.8001 {
		t.Errorf("ReadBurst(4) = %v, %v", b, err)
	}
	if x, err := v.ReadDC(ctx); err != nil || x != 0.03 {
		t.Errorf("ReadDC = %g, %v; want 0.03", x, err)
	}
	if _, err := v.ReadDC(ctx); !errors.Is(err, driver.ErrOverload) {
		t.Errorf("ReadDC on 9.9E37 = %v, want ErrOverload (SCPI-1999 Vol 1 §7.2.1)", err)
	}
	if v.LineHz() != 50 {
		t.Errorf("LineHz = %g", v.LineHz())
	}
}

func TestDCVoltmeterAperture(t *testing.T) {
	v, err := NewDCVoltmeter(playback(t, "dmm_dc_aperture.txt"), dmmProfile(t, `check_errors = true`, `check_errors = false`))
	if err != nil {
		t.Fatal(err)
	}
	if err := v.ConfigureDC(context.Background(), driver.DCConfig{RangeV: 5, Aperture: driver.Aperture{Seconds: 0.1}}); err != nil {
		t.Fatal(err)
	}
}

func TestDCVoltmeterAutoRange(t *testing.T) {
	v, err := NewDCVoltmeter(playback(t, "dmm_dc_auto.txt"), dmmProfile(t, `check_errors = true`, `check_errors = false`))
	if err != nil {
		t.Fatal(err)
	}
	if err := v.ConfigureDC(context.Background(), driver.DCConfig{RangeV: 0, Aperture: driver.Aperture{NPLC: 10}}); err != nil {
		t.Fatal(err)
	}
	if v.RangeV() != 0 {
		t.Errorf("RangeV on autorange = %g, want 0", v.RangeV())
	}
}

func TestDCVoltmeterRefusals(t *testing.T) {
	ctx := context.Background()
	// Without dc.set_auto_range, range 0 (autorange) is refused too.
	v, err := NewDCVoltmeter(empty(t), dmmProfile(t, `set_auto_range = "SENSe:VOLTage:DC:RANGe:AUTO ON"`, `set_auto_range = ""`))
	if err != nil {
		t.Fatal(err)
	}
	for _, cfg := range []driver.DCConfig{
		{RangeV: 0, Aperture: driver.Aperture{NPLC: 1}},
		{RangeV: 2000, Aperture: driver.Aperture{NPLC: 1}},
		{RangeV: math.NaN()},
	} {
		if err := v.ConfigureDC(ctx, cfg); !errors.Is(err, driver.ErrOutOfRange) {
			t.Errorf("ConfigureDC(%+v) = %v, want ErrOutOfRange", cfg, err)
		}
	}
	if _, err := v.ReadBurst(ctx, 1001); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("ReadBurst beyond max_samples = %v, want ErrOutOfRange", err)
	}
	if _, err := v.ReadBurst(ctx, 0); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("ReadBurst(0) = %v, want ErrOutOfRange", err)
	}
}

// TestDCAccuracy: ±(% of reading + % of range); on the 1 V range of the
// generic profile (0.0040 % + 0.0007 %), 0.5 V gives 20 µV + 7 µV.
func TestDCAccuracy(t *testing.T) {
	v, err := NewDCVoltmeter(empty(t), dmmProfile(t))
	if err != nil {
		t.Fatal(err)
	}
	if got, want := v.DCAccuracyV(0.5, 1), 0.5*0.0040/100+1*0.0007/100; math.Abs(got-want) > 1e-15 {
		t.Errorf("DCAccuracyV(0.5, 1) = %g, want %g", got, want)
	}
	if got, want := v.DCAccuracyV(-0.05, 0.1), 0.05*0.0050/100+0.1*0.0035/100; math.Abs(got-want) > 1e-15 {
		t.Errorf("DCAccuracyV(-0.05, 0.1) = %g, want %g", got, want)
	}
}

func TestACVoltmeterTranscript(t *testing.T) {
	ctx := context.Background()
	a, err := NewACVoltmeter(playback(t, "dmm_ac.txt"), dmmProfile(t))
	if err != nil {
		t.Fatal(err)
	}
	if err := a.ConfigureAC(ctx, driver.ACConfig{RangeVrms: 0.8}); err != nil {
		t.Fatal(err)
	}
	if x, err := a.ReadAC(ctx); err != nil || x != 0.707106781 {
		t.Errorf("ReadAC = %g, %v", x, err)
	}
}

func TestSwitchTranscript(t *testing.T) {
	ctx := context.Background()
	sp, err := profile.DecodeSwitch("switch-scpi.toml", embedded(t, "switch-scpi.toml", `settle_s = 0.02`, `settle_s = 0.0`))
	if err != nil {
		t.Fatal(err)
	}
	s, err := NewSwitch(playback(t, "switch_select.txt"), sp)
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Select(ctx, 3); err != nil {
		t.Fatal(err)
	}
	if s.Closed() != 3 {
		t.Errorf("Closed = %d", s.Closed())
	}
	if err := s.OpenAll(ctx); err != nil {
		t.Fatal(err)
	}
	if err := s.Select(ctx, 17); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("Select(17) on a 16-channel switch = %v, want ErrOutOfRange", err)
	}
}

// TestHaltWhileLocked: Halt is not held up by a role call in progress on
// another goroutine (here one whose context is never done, holding the
// role's lock), and it works with no context of the caller's.
func TestHaltWhileLocked(t *testing.T) {
	g, err := NewGenerator(playback(t, "generator_halt.txt"), genProfile(t), bench)
	if err != nil {
		t.Fatal(err)
	}
	if err := g.mu.acquire(context.Background()); err != nil {
		t.Fatal(err)
	}
	defer g.mu.release()
	if err := g.Halt(); err != nil {
		t.Fatalf("Halt while another call holds the role: %v", err)
	}
}

// TestCancelledContext: a role call under a cancelled context sends
// nothing and says why.
func TestCancelledContext(t *testing.T) {
	g, err := NewGenerator(empty(t), genProfile(t), bench)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := g.SetFrequency(ctx, 1000); !errors.Is(err, context.Canceled) {
		t.Errorf("SetFrequency under a cancelled context = %v, want context.Canceled", err)
	}
}

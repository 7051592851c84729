package bench

import (
	"context"
	"errors"
	"math"
	"net"
	"strings"
	"testing"
	"testing/fstest"
	"time"

	"github.com/rs/zerolog"

	"rolloff/configs"
	"rolloff/configs/configstest"
	"rolloff/driver"
	"rolloff/driver/profile"
	"rolloff/driver/sim"
)

func testCtx(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 15*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// benchFrom loads bench text against the embedded profiles.
func benchFrom(t *testing.T, text string) *profile.BenchFile {
	t.Helper()
	m := configstest.MapFS(t)
	m["test-bench.toml"] = &fstest.MapFile{Data: []byte(text)}
	cfg, err := profile.LoadBenchFS(m, "test-bench.toml")
	if err != nil {
		t.Fatal(err)
	}
	return cfg
}

func simBenchText(t *testing.T, edits ...string) string {
	t.Helper()
	data, err := configs.ReadFile(configs.SimBench)
	if err != nil {
		t.Fatal(err)
	}
	s := string(data)
	for i := 0; i+1 < len(edits); i += 2 {
		if !strings.Contains(s, edits[i]) {
			t.Fatalf("%q not in %s", edits[i], configs.SimBench)
		}
		s = strings.Replace(s, edits[i], edits[i+1], 1)
	}
	return s
}

// settle waits n converter time constants of model time.
func settle(b *Bench, tauS float64, n float64) {
	time.Sleep(time.Duration(n * tauS / b.TimeScale * float64(time.Second)))
}

// TestOpenDemo opens the demo bench through the real TCP transport and
// SCPI sessions, and checks each role against the simulator's state and
// its model of the DUT.
func TestOpenDemo(t *testing.T) {
	ctx := testCtx(t)
	b, err := OpenDemo(ctx, zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	if b.Sim == nil || b.TimeScale != 50 || b.LineHz != 50 {
		t.Fatalf("Sim %v, TimeScale %g, LineHz %g", b.Sim, b.TimeScale, b.LineHz)
	}
	for role, model := range map[string]string{"generator": "SIM-GEN-1", "voltmeter": "SIM-DCV-1", "switch": "SIM-SW-1"} {
		if id := b.Identities[role]; id.Manufacturer != "rolloff" || id.Model != model {
			t.Errorf("Identities[%s] = %+v", role, id)
		}
	}
	// Safe state first: the generator's first command is output off.
	if rx := b.Sim.Received("generator"); len(rx) == 0 || !strings.EqualFold(rx[0], "OUTPut OFF") {
		t.Errorf("generator received first %q, want OUTPut OFF", rx)
	}
	if b.Limits.MaxVrms != 1 || b.Generator.Limits().MaxVrms != 1 {
		t.Errorf("limits %+v / %+v, want the bench's 1 Vrms cap", b.Limits, b.Generator.Limits())
	}
	if err := b.Generator.SetAmplitude(ctx, 1.5); !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("SetAmplitude(1.5) above the bench cap = %v, want ErrOutOfRange", err)
	}
	const freqHz, vin = 1000.0, 0.05
	if err := b.Generator.SetFrequency(ctx, freqHz); err != nil {
		t.Fatal(err)
	}
	if err := b.Generator.SetAmplitude(ctx, vin); err != nil {
		t.Fatal(err)
	}
	if err := b.Generator.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	if !b.Sim.OutputOn() || b.Sim.FreqHz() != freqHz || math.Abs(b.Sim.DUTInputVrms()-vin) > 1e-12 {
		t.Errorf("simulator: on %v, %g Hz, %g Vrms at the DUT", b.Sim.OutputOn(), b.Sim.FreqHz(), b.Sim.DUTInputVrms())
	}
	// The DUT gives +20 dB: 0.5 Vrms, read on the "1 V" range.
	rs, ok := b.Converter.(driver.RangeSwitcher)
	if !ok {
		t.Fatal("the demo converter is relay-selected but not a RangeSwitcher")
	}
	idx := -1
	for i, r := range b.Converter.Ranges() {
		if r.Name == "1 V" {
			idx = i
		}
	}
	if err := rs.SwitchRange(ctx, idx); err != nil {
		t.Fatal(err)
	}
	if b.Sim.ConverterRange() != idx {
		t.Errorf("simulator range %d after SwitchRange(%d)", b.Sim.ConverterRange(), idx)
	}
	settle(b, b.Converter.Ranges()[idx].TimeConstantS, 12)
	dc, err := b.DCVoltmeter.ReadDC(ctx)
	if err != nil {
		t.Fatal(err)
	}
	r, err := b.Converter.Scale(idx, dc)
	if err != nil {
		t.Fatal(err)
	}
	want := vin * math.Pow(10, b.Sim.DUTGainDB(freqHz)/20)
	if math.Abs(r.Vrms-want)/want > 0.005 || r.Status != driver.InSpec {
		t.Errorf("measured %+v, want %.5g Vrms in spec (DUT gain %.4f dB)", r, want, b.Sim.DUTGainDB(freqHz))
	}
	// A burst of readings agrees with the single reading.
	if br, ok := b.DCVoltmeter.(driver.BurstReader); !ok {
		t.Error("DC voltmeter is not a BurstReader")
	} else if vals, err := br.ReadBurst(ctx, 5); err != nil || len(vals) != 5 || math.Abs(vals[4]-dc) > 0.005*dc {
		t.Errorf("ReadBurst(5) = %v, %v (single reading %g)", vals, err, dc)
	}
	if err := b.Close(); err != nil {
		t.Fatal(err)
	}
	if b.Sim.OutputOn() {
		t.Error("output still on after Close")
	}
	if err := b.Close(); err != nil {
		t.Errorf("second Close = %v", err)
	}
}

// TestOpenACDMM measures with the simulator's AC DMM instead of the
// converter.
func TestOpenACDMM(t *testing.T) {
	ctx := testCtx(t)
	text := simBenchText(t,
		`voltmeter_mode = "converter"`, `voltmeter_mode = "ac-dmm"`,
		"[voltmeter]\nprofile = \"dmm-scpi.toml\"\naddress = \"sim\"\nrange_v = 0\nnplc = 1\n", "[dmm]\nprofile = \"dmm-scpi.toml\"\naddress = \"sim\"\nrange_vrms = 1\n",
		"[converter]\n", "", `profile = "converter-10db-relay.toml"`, "",
		"[switch]\nprofile = \"switch-scpi.toml\"\naddress = \"sim\"\n", "")
	b, err := Open(ctx, benchFrom(t, text), zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	if b.DCVoltmeter != nil || b.Converter != nil || b.ACVoltmeter == nil {
		t.Fatalf("roles: DC %v, converter %v, AC %v", b.DCVoltmeter, b.Converter, b.ACVoltmeter)
	}
	const freqHz, vin = 2000.0, 0.02
	for _, err := range []error{b.Generator.SetFrequency(ctx, freqHz), b.Generator.SetAmplitude(ctx, vin), b.Generator.SetOutput(ctx, true)} {
		if err != nil {
			t.Fatal(err)
		}
	}
	tau := b.Sim.Config().DMM.TimeConstantS
	settle(b, tau, 12)
	v, err := b.ACVoltmeter.ReadAC(ctx)
	if err != nil {
		t.Fatal(err)
	}
	want := vin * math.Pow(10, b.Sim.DUTGainDB(freqHz)/20)
	if math.Abs(v-want)/want > 0.005 {
		t.Errorf("ReadAC = %g, want %g", v, want)
	}
}

// TestOperatorConverter: with the operator-selected profile the converter
// is not a RangeSwitcher, and the operator's hand (the simulator's range
// switch) sets what the DC output means.
func TestOperatorConverter(t *testing.T) {
	ctx := testCtx(t)
	text := simBenchText(t, `profile = "converter-10db-relay.toml"`, `profile = "converter-10db.toml"`,
		"[switch]\nprofile = \"switch-scpi.toml\"\naddress = \"sim\"\n", "")
	b, err := Open(ctx, benchFrom(t, text), zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	if _, ok := b.Converter.(driver.RangeSwitcher); ok {
		t.Error("operator-selected converter satisfies RangeSwitcher")
	}
	if b.Switch != nil {
		t.Error("switch opened on an operator bench")
	}
	if err := b.Sim.SelectRange(4); err != nil { // "100 mV"
		t.Fatal(err)
	}
	for _, err := range []error{b.Generator.SetFrequency(ctx, 1000), b.Generator.SetAmplitude(ctx, 0.008), b.Generator.SetOutput(ctx, true)} {
		if err != nil {
			t.Fatal(err)
		}
	}
	settle(b, b.Converter.Ranges()[4].TimeConstantS, 12)
	dc, err := b.DCVoltmeter.ReadDC(ctx)
	if err != nil {
		t.Fatal(err)
	}
	r, err := b.Converter.Scale(4, dc)
	want := 0.008 * math.Pow(10, b.Sim.DUTGainDB(1000)/20)
	if err != nil || math.Abs(r.Vrms-want)/want > 0.005 || r.Status != driver.InSpec {
		t.Errorf("Scale = %+v, %v; want %g Vrms", r, err, want)
	}
}

// deadAddr returns a loopback TCP address nobody listens on.
func deadAddr(t *testing.T) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := ln.Addr().String()
	ln.Close()
	return "tcp://" + addr
}

const realBench = `voltmeter_mode = "converter"
[limits]
min_freq_hz = 10
max_freq_hz = 100000
max_vrms = 1
[generator]
profile = "generator-scpi.toml"
address = "GEN"
[voltmeter]
profile = "dmm-scpi.toml"
address = "DCV"
[converter]
profile = "converter-10db.toml"
`

func TestOpenDeadAddress(t *testing.T) {
	dead := deadAddr(t)
	text := strings.NewReplacer("GEN", dead, "DCV", dead).Replace(realBench)
	b, err := Open(testCtx(t), benchFrom(t, text), zerolog.Nop())
	if err == nil || b != nil {
		t.Fatalf("Open on a dead address = %v, %v; want nil and an error", b, err)
	}
	for _, s := range []string{"generator", dead, "tcp transport"} {
		if !strings.Contains(err.Error(), s) {
			t.Errorf("error %q does not name %q", err, s)
		}
	}
}

// TestOpenPartialFailure: the generator opens, the voltmeter does not;
// Open halts the generator and closes it before returning the error.
func TestOpenPartialFailure(t *testing.T) {
	ctx := testCtx(t)
	s, err := sim.New(sim.DemoConfig())
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if err := s.Start(ctx); err != nil {
		t.Fatal(err)
	}
	dead := deadAddr(t)
	text := strings.NewReplacer("GEN", s.Addr("generator"), "DCV", dead).Replace(realBench)
	b, err := Open(ctx, benchFrom(t, text), zerolog.Nop())
	if err == nil || b != nil {
		t.Fatalf("Open = %v, %v; want nil and an error", b, err)
	}
	if !strings.Contains(err.Error(), "voltmeter at "+dead) {
		t.Errorf("error %q does not name the voltmeter and its address", err)
	}
	rx := s.Received("generator")
	// Output off is the first command, and the last one (confirmed by
	// *OPC?, IEEE 488.2 §10.19).
	if len(rx) < 4 || !strings.EqualFold(rx[0], "OUTPut OFF") || !strings.EqualFold(rx[len(rx)-2], "OUTPut OFF") || rx[len(rx)-1] != "*OPC?" {
		t.Errorf("generator received %q; want output off first and last", rx)
	}
	if s.OutputOn() {
		t.Error("generator output on after a failed Open")
	}
}

// TestIdentityMismatch: a profile's identity check refuses another
// instrument, naming the role and the answer.
func TestIdentityMismatch(t *testing.T) {
	ctx := testCtx(t)
	data, err := configs.ReadFile("generator-scpi.toml")
	if err != nil {
		t.Fatal(err)
	}
	gp := strings.Replace(string(data), `model_prefix = ""`, `model_prefix = "OTHER-"`, 1)
	m := configstest.MapFS(t)
	m["generator-scpi.toml"] = &fstest.MapFile{Data: []byte(gp)}
	cfg, err := profile.LoadBenchFS(m, configs.SimBench)
	if err != nil {
		t.Fatal(err)
	}
	b, err := Open(ctx, cfg, zerolog.Nop())
	if err == nil || b != nil {
		t.Fatalf("Open = %v, %v; want an identity error", b, err)
	}
	for _, s := range []string{"generator", "SIM-GEN-1", "OTHER-"} {
		if !strings.Contains(err.Error(), s) {
			t.Errorf("error %q does not name %q", err, s)
		}
	}
}

// TestSimConfigFromProfiles: the simulator's converter takes its ranges
// from the converter profile, so that the two agree.
func TestSimConfigFromProfiles(t *testing.T) {
	cfg, err := configs.LoadBench(configs.SimBench)
	if err != nil {
		t.Fatal(err)
	}
	spec := cfg.Converter.Spec
	sc, err := sim.FromBenchFile(cfg)
	if err != nil {
		t.Fatal(err)
	}
	got := sc.Converter.Ranges
	if len(got) != len(spec.Ranges) {
		t.Fatalf("simulator has %d ranges, profile %d", len(got), len(spec.Ranges))
	}
	for i := range got {
		if got[i].FullScaleVrms != spec.Ranges[i].FullScaleVrms || got[i].TimeConstantS != spec.Ranges[i].TimeConstantS || got[i].Name != spec.Ranges[i].Name {
			t.Errorf("range %d: simulator %+v, profile %+v", i, got[i], spec.Ranges[i])
		}
	}
	// The demo DUT of the bench file: its sections replace the
	// simulator's defaults rather than adding to them.
	if secs := sc.DUT.Sections; len(secs) != 2 || secs[0].Kind != "highpass1" || secs[0].FreqHz != 8 || secs[1].Kind != "butterworth-lowpass" || secs[1].FreqHz != 95e3 || secs[1].Order != 2 {
		t.Errorf("DUT sections %+v", secs)
	}
	if d := sc.DUT; d.GainDB != 20 || d.ClipV != 12 {
		t.Errorf("DUT %+v, want +20 dB clipping at 12 V", d)
	}
	if sc.TimeScale != 50 || cfg.TimeScale != 50 {
		t.Errorf("time scale: sim %g, bench %g", sc.TimeScale, cfg.TimeScale)
	}
	if sc.Converter.HoldIntervalS != spec.HoldIntervalS || sc.Converter.HoldS != spec.HoldS {
		t.Errorf("hold: sim %g/%g, profile %g/%g", sc.Converter.HoldIntervalS, sc.Converter.HoldS, spec.HoldIntervalS, spec.HoldS)
	}
}

// TestOpenVin opens a bench with a second AC voltmeter on the DUT input:
// here a second simulated bench's DMM, reached at its TCP address.
func TestOpenVin(t *testing.T) {
	ctx := testCtx(t)
	s2, err := sim.New(sim.DemoConfig())
	if err != nil {
		t.Fatal(err)
	}
	defer s2.Close()
	if err := s2.Start(ctx); err != nil {
		t.Fatal(err)
	}
	text := simBenchText(t, "\n[switch]\n", "\n[vin]\nprofile = \"dmm-scpi.toml\"\naddress = \""+s2.Addr("dmm")+"\"\nrange_vrms = 1\n[switch]\n")
	b, err := Open(ctx, benchFrom(t, text), zerolog.Nop())
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	if b.Vin == nil || b.Identities["vin"].Model != "SIM-DMM-1" {
		t.Fatalf("Vin %v, identity %+v", b.Vin, b.Identities["vin"])
	}
	if _, err := b.Vin.ReadAC(ctx); err != nil {
		t.Errorf("Vin.ReadAC: %v", err)
	}
	rx := s2.Received("dmm")
	if len(rx) == 0 || rx[0] != "*IDN?" {
		t.Errorf("vin DMM received %q", rx)
	}
}

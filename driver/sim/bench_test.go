package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"rolloff/driver"
)

// IEEE 488.2 §10.14: *IDN? over a raw TCP socket, for every role.
func TestIDNOverRawTCP(t *testing.T) {
	cfg := quietConfig()
	b := startBench(t, cfg)
	want := map[string]string{
		RoleGenerator: cfg.Generator.IDN, RoleVoltmeter: cfg.Voltmeter.IDN,
		RoleSwitch: cfg.Switch.IDN, RoleDMM: cfg.DMM.IDN,
	}
	for _, role := range Roles {
		addr := b.Addr(role)
		if !strings.HasPrefix(addr, "tcp://127.0.0.1:") {
			t.Fatalf("%s address %q", role, addr)
		}
		c := dial(t, addr)
		if got := c.query("*IDN?"); got != want[role] {
			t.Errorf("%s: *IDN? = %q, want %q", role, got, want[role])
		}
		if got := c.query("SYST:VERS?"); got != "1999.0" {
			t.Errorf("%s: SYST:VERS? = %q", role, got)
		}
	}
	if b.Addr("oscilloscope") != "" || b.Faults("oscilloscope") != nil {
		t.Errorf("unknown role has an address or faults")
	}
	// Two clients of one instrument at once.
	c1, c2 := dial(t, b.Addr(RoleGenerator)), dial(t, b.Addr(RoleGenerator))
	c1.do("FREQ 1234")
	if got := c2.float("FREQ?"); got != 1234 {
		t.Errorf("second client sees %g Hz", got)
	}
}

func TestGeneratorCommands(t *testing.T) {
	b := startBench(t, quietConfig())
	g := dial(t, b.Addr(RoleGenerator))
	g.do("*RST;:SOUR:FREQ 2.5kHz;:SOUR:VOLT 0.5;:OUTP ON")
	if b.FreqHz() != 2500 || b.AmplitudeVrms() != 0.5 || !b.OutputOn() {
		t.Fatalf("state %g Hz %g Vrms on %v", b.FreqHz(), b.AmplitudeVrms(), b.OutputOn())
	}
	g.noErrors()
	// Out of limits: -222 and the previous value kept.
	g.do("FREQ 1e12;VOLT 100")
	for i := 0; i < 2; i++ {
		if e := g.query("SYST:ERR?"); !strings.HasPrefix(e, "-222,") {
			t.Errorf("out of limits: %s, want -222", e)
		}
	}
	if b.FreqHz() != 2500 || b.AmplitudeVrms() != 0.5 {
		t.Errorf("refused settings changed the state: %g Hz %g Vrms", b.FreqHz(), b.AmplitudeVrms())
	}
	// Units. A sine's Vpp is 2√2 Vrms; a square's 2 Vrms; 0 dBm into
	// 50 Ω is √(50 Ω × 1 mW) = 0.2236 Vrms (definition of dBm).
	g.do("VOLT:UNIT VPP;:VOLT 2")
	if v := b.AmplitudeVrms(); math.Abs(v-1/math.Sqrt2) > 1e-12 {
		t.Errorf("2 Vpp sine = %g Vrms", v)
	}
	g.do("FUNC SQU")
	if got := g.float("VOLT?"); math.Abs(got-2/math.Sqrt2) > 1e-7 {
		t.Errorf("square at %g Vrms reads %g Vpp", b.AmplitudeVrms(), got)
	}
	g.do("FUNC SIN;:VOLT:UNIT DBM;:VOLT 0")
	if v := b.AmplitudeVrms(); math.Abs(v-0.223606798) > 1e-8 {
		t.Errorf("0 dBm = %g Vrms", v)
	}
	if got := g.query("VOLT:UNIT?;:FUNC?;:OUTP?"); got != "DBM;SIN;1" {
		t.Errorf("queries: %q", got)
	}
	g.do("VOLT:UNIT VRMS;:VOLT 100 mVPP")
	if v := b.AmplitudeVrms(); math.Abs(v-0.1/(2*math.Sqrt2)) > 1e-12 {
		t.Errorf("100 mVPP = %g Vrms", v)
	}
	if got := g.float("FREQ? MAX"); got != 20e6 {
		t.Errorf("FREQ? MAX = %g", got)
	}
	// LOAD 50 into a high-impedance DUT doubles the voltage the DUT sees
	// (voltage divider with the 50 Ω source).
	g.do("VOLT 0.1;:OUTP:LOAD 50")
	if v := b.DUTInputVrms(); math.Abs(v-0.2) > 1e-12 {
		t.Errorf("LOAD 50 into high impedance: DUT sees %g, want 0.2", v)
	}
	if got := g.query("OUTP:LOAD?"); got != "+5.00000000E+01" {
		t.Errorf("OUTP:LOAD? = %q", got)
	}
	g.do("OUTP:LOAD INF")
	if v := b.DUTInputVrms(); v != 0.1 {
		t.Errorf("LOAD INF: DUT sees %g", v)
	}
	if got := g.query("OUTP:LOAD?"); got != "+9.90000000E+37" {
		t.Errorf("OUTP:LOAD? = %q", got)
	}
	g.do("*RST")
	if b.OutputOn() || b.FreqHz() != 1000 || b.AmplitudeVrms() != 0.1 || b.DUTInputVrms() != 0 {
		t.Errorf("*RST: on %v %g Hz %g Vrms", b.OutputOn(), b.FreqHz(), b.AmplitudeVrms())
	}
	g.noErrors()
}

func TestSwitchAndSelectRange(t *testing.T) {
	b := startBench(t, quietConfig())
	s := dial(t, b.Addr(RoleSwitch))
	if b.ConverterRange() != 6 {
		t.Errorf("initial range %d, want 6 (1 V)", b.ConverterRange())
	}
	s.do("ROUT:CLOS (@4)")
	if b.ConverterRange() != 3 {
		t.Errorf("after CLOS (@4): range %d, want 3", b.ConverterRange())
	}
	if got := s.query("ROUT:CLOS? (@3,4);:ROUT:CLOS:STAT?;:ROUT:OPEN? (@4)"); got != "0,1;(@4);0" {
		t.Errorf("queries: %q", got)
	}
	s.do("ROUT:OPEN:ALL")
	if b.ConverterRange() != -1 || s.query("ROUT:CLOS:STAT?") != "(@)" {
		t.Errorf("after OPEN:ALL range %d", b.ConverterRange())
	}
	s.do("ROUT:CLOS (@13)")
	s.do("ROUT:CLOS (@1,2)")
	for _, want := range []string{"-222,", "-224,"} {
		if e := s.query("SYST:ERR?"); !strings.HasPrefix(e, want) {
			t.Errorf("error %s, want %s", e, want)
		}
	}
	if err := b.SelectRange(2); err != nil || s.query("ROUT:CLOS:STAT?") != "(@3)" {
		t.Errorf("SelectRange(2): %v, %s", err, s.query("ROUT:CLOS:STAT?"))
	}
	if err := b.SelectRange(12); !errors.Is(err, ErrRange) || !errors.Is(err, driver.ErrOutOfRange) {
		t.Errorf("SelectRange(12) = %v", err)
	}
	s.do("ROUT:CLOS (@2);*RST")
	if b.ConverterRange() != -1 {
		t.Errorf("*RST leaves range %d, want every relay open", b.ConverterRange())
	}
}

// settle drives the DUT to outVrms at freqHz, selects the range and
// waits 40 time constants.
func settle(t *testing.T, b *Bench, g *client, freqHz, outVrms float64, rng int) {
	t.Helper()
	in := outVrms / math.Pow(10, b.DUTGainDB(freqHz)/20)
	g.do(fmt.Sprintf("FREQ %.12g;VOLT %.12g;OUTP ON", freqHz, in))
	if err := b.SelectRange(rng); err != nil {
		t.Fatal(err)
	}
	waitModel(b, 40*b.Config().Converter.Ranges[rng].TimeConstantS)
}

// Common practice: on a 31.62 mV range with 1 V DC at full scale, 30 mV
// reads 0.948 V (30/31.62 = 0.9487); on a 100 mV range 0.8 V is 80 mV.
func TestRangeScalingThroughVoltmeter(t *testing.T) {
	b := startBench(t, quietConfig())
	g := dial(t, b.Addr(RoleGenerator))
	v := dial(t, b.Addr(RoleVoltmeter))
	v.do("CONF:VOLT:DC 1;:VOLT:NPLC 10")
	settle(t, b, g, 1000, 30e-3, 3)
	if got := v.float("READ?"); math.Abs(got-0.9487) > 1e-4 || math.Abs(got-0.948683) > 2e-6 {
		t.Errorf("30 mV on 31.62 mV reads %.7f V, want 0.948683", got)
	}
	settle(t, b, g, 1000, 80e-3, 4)
	if got := v.float("MEAS:VOLT:DC? 1"); math.Abs(got-0.8) > 2e-6 {
		t.Errorf("80 mV on 100 mV reads %.7f V, want 0.8", got)
	}
	// The DC voltmeter's own range: 0.8 V is beyond 0.1 V × 1.25.
	if got := v.query("VOLT:RANG 0.1;:READ?"); got != "+9.90000000E+37" {
		t.Errorf("0.8 V on the 0.1 V range: %q, want overflow", got)
	}
	if got := v.query("VOLT:RANG?;:VOLT:RANG:AUTO?"); got != "+1.00000000E-01;0" {
		t.Errorf("range queries %q", got)
	}
	v.noErrors()
}

// Over-range saturates the DC output at 1.2 × full scale and the bench
// reports the overload.
func TestConverterSaturation(t *testing.T) {
	b := startBench(t, quietConfig())
	g := dial(t, b.Addr(RoleGenerator))
	v := dial(t, b.Addr(RoleVoltmeter))
	settle(t, b, g, 1000, 50e-3, 3)
	if got := v.float("READ?"); math.Abs(got-1.2) > 1e-9 || !b.Overloaded() {
		t.Errorf("50 mV on 31.62 mV: %g V overloaded %v, want 1.2 V and overloaded", got, b.Overloaded())
	}
	if err := b.SelectRange(5); err != nil {
		t.Fatal(err)
	}
	// The new range's τ (0.4 s against 0.5 s) changes the steady 2 kHz
	// ripple, r = 1/(4πfτ) ≈ 2e-4 of the mean square: a transient of
	// that size follows the switch.
	if got := v.float("READ?"); b.Overloaded() || math.Abs(got/(0.05/0.316227766)-1) > 1e-4 {
		t.Errorf("on 316.2 mV: %g V overloaded %v", got, b.Overloaded())
	}
}

// READ? takes SAMPle:COUNt apertures of model time, i.e. count × NPLC /
// line_hz / time_scale of wall time, before it answers.
func TestReadTimingHonoursAperture(t *testing.T) {
	cfg := quietConfig()
	cfg.TimeScale = 10
	b := startBench(t, cfg)
	v := dial(t, b.Addr(RoleVoltmeter))
	for _, tc := range []struct {
		setup string
		n     int
		wall  time.Duration
	}{
		{"VOLT:NPLC 10;:SAMP:COUN 5", 5, 5 * 10 * time.Second / 50 / 10},     // 100 ms
		{"VOLT:APER 0.5;:SAMP:COUN 1", 1, 500 * time.Millisecond / 10},       // 50 ms
		{"VOLT:NPLC 1;:SAMP:COUN 20", 20, 20 * time.Second / 50 / 10},        // 40 ms
		{"VOLT:APER 100us;:SAMP:COUN 3", 3, 3 * 100 * time.Microsecond / 10}, // 30 µs
	} {
		v.do(tc.setup)
		start := time.Now()
		got := v.floats("READ?")
		el := time.Since(start)
		if len(got) != tc.n {
			t.Errorf("%s: %d readings", tc.setup, len(got))
		}
		// The lower bound is the point; the upper one only catches a
		// wait of the wrong order.
		if el < tc.wall || el > 3*tc.wall+2*time.Second {
			t.Errorf("%s: READ? took %v, want %v", tc.setup, el, tc.wall)
		}
	}
	// INITiate returns at once; FETCh? waits for the end (3 × 2 s of
	// model time: 600 ms).
	v.do("VOLT:NPLC 100;:SAMP:COUN 3")
	start := time.Now()
	v.send("INIT")
	if got := v.query("*OPC?"); got != "1" || time.Since(start) > 400*time.Millisecond {
		t.Errorf("INIT blocked: %v", time.Since(start))
	}
	if got := v.floats("FETC?"); len(got) != 3 || time.Since(start) < 600*time.Millisecond {
		t.Errorf("FETC? after %v: %v", time.Since(start), got)
	}
	if got := v.query("VOLT:APER?;NPLC?"); got != "+2.00000000E+00;+1.00000000E+02" {
		t.Errorf("APER?;NPLC? = %q", got)
	}
	v.noErrors()
	v.send("*RST;:FETC?")
	if e := v.query("SYST:ERR?"); !strings.HasPrefix(e, "-230,") {
		t.Errorf("FETC? without measurement: %s", e)
	}
}

// The ripple at 2f on the mean square is 1/√(1+(4πfτ)²) of its mean
// (derived in sim/model), measured here through the voltmeter with short
// apertures: y_max,min = C0(1 ± r), so r = (Vmax² - Vmin²)/(Vmax² + Vmin²).
func TestRippleThroughVoltmeter(t *testing.T) {
	const f = 2.0
	prev := math.Inf(1)
	for _, tau := range []float64{0.1, 0.4} {
		cfg := quietConfig()
		cfg.TimeScale = 200
		cfg.DUT = DUTConfig{}
		for i := range cfg.Converter.Ranges {
			cfg.Converter.Ranges[i].TimeConstantS = tau
		}
		b := startBench(t, cfg)
		g := dial(t, b.Addr(RoleGenerator))
		v := dial(t, b.Addr(RoleVoltmeter))
		g.do(fmt.Sprintf("FREQ %g;VOLT 0.5;OUTP ON", f))
		waitModel(b, 40*tau)
		// 200 apertures of 2.5 ms: two ripple periods (4 Hz).
		rs := v.floats("VOLT:APER 2.5ms;:SAMP:COUN 200;:READ?")
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, x := range rs {
			lo, hi = math.Min(lo, x), math.Max(hi, x)
		}
		r := (hi*hi - lo*lo) / (hi*hi + lo*lo)
		want := 1 / math.Sqrt(1+math.Pow(4*math.Pi*f*tau, 2))
		if math.Abs(r/want-1) > 0.01 {
			t.Errorf("τ=%g: ripple %.5f, formula %.5f", tau, r, want)
		}
		if r >= prev {
			t.Errorf("ripple did not fall with τ")
		}
		prev = r
		// A long aperture over whole ripple periods averages it out.
		avg := v.float("VOLT:APER 1;:SAMP:COUN 1;:READ?")
		if math.Abs(avg-(hi+lo)/2) > 0.05*(hi-lo)+1e-3 {
			t.Errorf("τ=%g: 1 s aperture reads %g, ripple between %g and %g", tau, avg, lo, hi)
		}
	}
}

// First-order step response (handbook): switching the output on, the
// reading climbs to within e^-5 of the mean square (0.674 %) after 5τ.
func TestStepSettlingThroughVoltmeter(t *testing.T) {
	cfg := quietConfig()
	cfg.TimeScale = 1 // the latency between the two sockets is model time too
	const tau = 0.1
	for i := range cfg.Converter.Ranges {
		cfg.Converter.Ranges[i].TimeConstantS = tau
	}
	b := startBench(t, cfg)
	g := dial(t, b.Addr(RoleGenerator))
	v := dial(t, b.Addr(RoleVoltmeter))
	g.do("FREQ 10kHz;VOLT 0.05")
	final := 0.05 * math.Pow(10, b.DUTGainDB(10e3)/20)
	g.do("OUTP ON")
	// 60 readings of τ/10 span 6τ.
	rs := v.floats("VOLT:APER 10ms;:SAMP:COUN 60;:READ?")
	if rs[0] > 0.5*final {
		t.Errorf("first reading %g already near the final %g", rs[0], final)
	}
	for i := 1; i < len(rs); i++ {
		if rs[i] < rs[i-1] {
			t.Errorf("reading %d fell: %g after %g", i, rs[i], rs[i-1])
		}
	}
	if last := rs[len(rs)-1]; last < final*(1-0.00674) || last > final*(1+1e-6) {
		t.Errorf("after 6τ %g, final %g", last, final)
	}
}

// The analog meter's output freezes for hold_s every hold_interval_s:
// during a step response, consecutive readings are equal only there.
func TestHoldInterval(t *testing.T) {
	cfg := quietConfig()
	cfg.TimeScale = 100
	cfg.Converter.HoldIntervalS = 1
	cfg.Converter.HoldS = 0.2
	for i := range cfg.Converter.Ranges {
		cfg.Converter.Ranges[i].TimeConstantS = 2
	}
	b := startBench(t, cfg)
	g := dial(t, b.Addr(RoleGenerator))
	v := dial(t, b.Addr(RoleVoltmeter))
	g.do("FREQ 10kHz;VOLT 0.05;OUTP ON")
	rs := v.floats("VOLT:APER 10ms;:SAMP:COUN 250;:READ?") // 2.5 s
	// Runs of equal readings; a run cut by the start or the end of the
	// burst is not counted.
	var runs []int
	run, from := 0, 0
	for i := 1; i < len(rs); i++ {
		switch {
		case rs[i] == rs[i-1]:
			if run == 0 {
				from = i - 1
			}
			run++
		case rs[i] > rs[i-1]:
			if run > 0 && from > 0 {
				runs = append(runs, run+1)
			}
			run = 0
		default:
			t.Fatalf("reading %d fell", i)
		}
	}
	if len(runs) < 2 {
		t.Fatalf("held runs %v, want at least two holds in 2.5 s", runs)
	}
	for _, r := range runs {
		// 0.2 s hold at 10 ms apertures: 19-21 equal readings (the
		// readings straddling the edges differ).
		if r < 18 || r > 21 {
			t.Errorf("held run of %d readings, want about 20 (runs %v)", r, runs)
		}
	}
}

// The AC DMM reads the DUT output's true RMS directly.
func TestDMMReadsTrueRMS(t *testing.T) {
	cfg := quietConfig()
	b := startBench(t, cfg)
	g := dial(t, b.Addr(RoleGenerator))
	d := dial(t, b.Addr(RoleDMM))
	for _, shape := range []string{"SIN", "SQU", "TRI"} {
		g.do("FUNC " + shape + ";FREQ 1kHz;VOLT 0.05;OUTP ON")
		waitModel(b, 40*cfg.DMM.TimeConstantS)
		want := b.DUTOutputVrms()
		if got := d.float("MEAS:VOLT:AC?"); math.Abs(got/want-1) > 1e-4 {
			t.Errorf("%s: DMM %g Vrms, DUT output %g", shape, got, want)
		}
	}
	// 0.05 Vrms × 10 (+20 dB) ≈ 0.5 V, just under clipping for none.
	if got := d.query("CONF:VOLT:AC 0.1;:READ?"); got != "+9.90000000E+37" {
		t.Errorf("0.5 V on the 0.1 V range: %q", got)
	}
	d.do("CONF:VOLT:DC")
	if e := d.query("SYST:ERR?"); !strings.HasPrefix(e, "-113,") {
		t.Errorf("the DMM accepted a DC configuration: %s", e)
	}
}

func TestReceivedAndAccessors(t *testing.T) {
	b := startBench(t, quietConfig())
	g := dial(t, b.Addr(RoleGenerator))
	g.do("FREQ 100; VOLT 0.1")
	g.query("*IDN?")
	want := []string{"FREQ 100", "VOLT 0.1", "*OPC?", "*IDN?"}
	if got := b.Received(RoleGenerator); fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("Received = %q, want %q", got, want)
	}
	if got := b.Received(RoleVoltmeter); len(got) != 0 {
		t.Errorf("voltmeter received %q", got)
	}
	if g := b.DUTGainDB(1000); math.Abs(g-20) > 0.01 {
		t.Errorf("DUT gain at 1 kHz %g dB", g)
	}
	lo, hi := b.DUTCorners(-3)
	if math.Abs(lo/8-1) > 0.005 || math.Abs(hi/95e3-1) > 0.005 {
		t.Errorf("corners %g, %g", lo, hi)
	}
	if b.TimeScale() != 1000 || len(b.Ranges()) != 12 || b.Ranges()[3].Name != "31.62 mV" {
		t.Errorf("TimeScale %g, ranges %v", b.TimeScale(), b.Ranges())
	}
}

func TestCloseIdempotent(t *testing.T) {
	b, err := New(quietConfig())
	if err != nil {
		t.Fatal(err)
	}
	if err := b.Start(context.Background()); err != nil {
		t.Fatal(err)
	}
	v := dial(t, b.Addr(RoleVoltmeter))
	v.send("VOLT:APER 10;:READ?") // 10 ms of wall time at 1000×... then closed
	done := make(chan struct{})
	go func() { b.Close(); close(done) }()
	select {
	case <-done:
	case <-time.After(5 * time.Second):
		t.Fatal("Close hung")
	}
	if err := b.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
	if _, err := b.ServeSerial(RoleGenerator); !errors.Is(err, driver.ErrClosed) {
		t.Errorf("ServeSerial after Close: %v", err)
	}
	if err := b.Start(context.Background()); err == nil {
		t.Errorf("Start after Close succeeded")
	}
}

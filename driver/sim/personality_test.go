package sim

import (
	"math"
	"strings"
	"testing"
	"time"
)

// errCode reads one SYST:ERR? entry's number.
func errCode(c *client) string {
	e := c.query("SYST:ERR?")
	code, _, _ := strings.Cut(e, ",")
	return code
}

func TestPersonalityPlainMeter(t *testing.T) {
	cfg := quietConfig()
	cfg.Voltmeter.Personality = PersonalityPlain
	b := startBench(t, cfg)
	c := dial(t, b.Addr(RoleVoltmeter))
	// SCPI-1999 Vol 2 §21.8.9: -113 Undefined header.
	for _, cmd := range []string{"SAMPle:COUNt 5", "SENSe:VOLTage:DC:NPLCycles 1", "SENSe:VOLTage:DC:APERture 0.02"} {
		c.send(cmd)
		if code := errCode(c); code != "-113" {
			t.Errorf("%s: error %s, want -113", cmd, code)
		}
	}
	if v := c.floats("READ?"); len(v) != 1 {
		t.Errorf("READ? gave %d readings, want 1", len(v))
	}
}

func TestPersonalityInitFetchAndMeasure(t *testing.T) {
	cfg := quietConfig()
	cfg.Voltmeter.Personality = PersonalityInitFetch
	cfg.DMM.Personality = PersonalityMeasure
	b := startBench(t, cfg)
	v := dial(t, b.Addr(RoleVoltmeter))
	v.send("READ?")
	if code := errCode(v); code != "-113" {
		t.Errorf("READ? on the INITiate/FETCh? meter: error %s, want -113", code)
	}
	v.send("INITiate")
	if r := v.floats("FETCh?"); len(r) != 1 {
		t.Errorf("FETCh? = %v", r)
	}
	d := dial(t, b.Addr(RoleDMM))
	d.send("CONFigure:VOLTage:AC")
	if code := errCode(d); code != "-113" {
		t.Errorf("CONFigure on the MEASure-only meter: error %s, want -113", code)
	}
	if r := d.floats("MEASure:VOLTage:AC? 10"); len(r) != 1 {
		t.Errorf("MEASure? = %v", r)
	}
}

func TestPersonalitySuffixed(t *testing.T) {
	cfg := quietConfig()
	cfg.Voltmeter.Personality = PersonalitySuffixed
	b := startBench(t, cfg)
	c := dial(t, b.Addr(RoleVoltmeter))
	if id := c.query("*IDN?"); len(strings.Split(id, ",")) != 3 {
		t.Errorf("*IDN? = %q, want 3 fields", id)
	}
	if r := c.query("READ?"); !strings.HasSuffix(r, " VDC") || strings.HasSuffix(r, ",") {
		t.Errorf("READ? = %q, want one reading with VDC", r)
	}
	c.send("SAMPle:COUNt 3")
	if r := c.query("READ?"); strings.Count(r, "VDC") != 3 || !strings.HasSuffix(r, "VDC,") {
		t.Errorf("burst = %q, want 3 readings in VDC and a trailing comma", r)
	}
	if r := c.query("*OPC?"); r != "1" {
		t.Errorf("*OPC? = %q: only readings carry a unit", r)
	}
	b.Faults(RoleVoltmeter).ForceOverflow(1)
	c.send("SAMPle:COUNt 1")
	if r := c.query("READ?"); r != "OVLD" {
		t.Errorf("overload = %q, want OVLD", r)
	}
}

func TestPersonalitySlow(t *testing.T) {
	cfg := quietConfig()
	cfg.Voltmeter.Personality = PersonalitySlow
	b := startBench(t, cfg)
	c := dial(t, b.Addr(RoleVoltmeter))
	t0 := time.Now()
	for i := 1; i < slowDropEvery; i++ {
		c.query("*OPC?")
	}
	if el := time.Since(t0); el < time.Duration(slowDropEvery-1)*slowAnswer {
		t.Errorf("%d answers in %v, want at least %v each", slowDropEvery-1, el, slowAnswer)
	}
	c.send("*OPC?")
	if _, err := c.readLine(2 * time.Second); err == nil {
		t.Error("the 50th query was answered; want the connection dropped")
	}
}

func TestPersonalityApplyVpp(t *testing.T) {
	cfg := quietConfig()
	cfg.Generator.Personality = PersonalityApplyVpp
	b := startBench(t, cfg)
	c := dial(t, b.Addr(RoleGenerator))
	c.do("APPLy:SINusoid 2000,2.0,0")
	// 2 Vpp shown into 50 Ω from a 50 Ω source on a hi-z DUT: the DUT
	// gets twice the shown 2/(2√2) Vrms.
	if got, want := b.DUTInputVrms(), 0.0; got != want {
		t.Errorf("output off: DUT input %g", got)
	}
	c.do("OUTPut ON")
	if got, want := b.DUTInputVrms(), 2*2/(2*math.Sqrt2); math.Abs(got/want-1) > 1e-12 {
		t.Errorf("DUT input %g Vrms, want %g", got, want)
	}
	// An omitted parameter takes its reset value: the level silently
	// goes back to reset_vrms shown, the hazard apply-style profiles
	// must avoid by carrying every parameter.
	c.do("APPLy:SINusoid 3000")
	if got, want := b.AmplitudeVrms(), cfg.Generator.ResetVrms; math.Abs(got-want) > 1e-12 || b.FreqHz() != 3000 {
		t.Errorf("after APPLy with the frequency alone: %g Vrms at %g Hz, want reset %g Vrms", got, b.FreqHz(), want)
	}
	c.send("SOURce:FREQuency 1000")
	if code := errCode(c); code != "-113" {
		t.Errorf("FREQuency on the apply-style generator: error %s, want -113", code)
	}
}

func TestPersonalityOPCMute(t *testing.T) {
	cfg := quietConfig()
	cfg.Generator.Personality = PersonalityOPCMute
	b := startBench(t, cfg)
	c := dial(t, b.Addr(RoleGenerator))
	c.do("OUTPut ON")
	c.send("SOURce:FREQuency 2000")
	c.query("SYST:ERR?") // executed, without *OPC?
	if v := b.DUTInputVrms(); v != 0 {
		t.Errorf("just after a frequency change the output gives %g Vrms, want muted", v)
	}
	t0 := time.Now()
	if r := c.query("*OPC?"); r != "1" {
		t.Fatalf("*OPC? = %q", r)
	}
	if el := time.Since(t0); el < muteAfterFreq/2 {
		t.Errorf("*OPC? answered after %v, want about %v", el, muteAfterFreq)
	}
	if v := b.DUTInputVrms(); v == 0 {
		t.Error("output still muted after *OPC? said done")
	}
}

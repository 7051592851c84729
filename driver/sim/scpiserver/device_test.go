package scpiserver

import (
	"context"
	"fmt"
	"strings"
	"testing"
)

// testDevice has a small generator-like tree; handlers record what they
// saw so that the parser's work can be checked.
type testDevice struct {
	*Device
	freqHz float64
	volts  float64
	on     bool
	shape  string
	chans  []int
	log    []string
}

func newTestDevice(t *testing.T, queueLen int) *testDevice {
	t.Helper()
	td := &testDevice{freqHz: 1000, shape: "SIN"}
	td.Device = New(Opts{IDN: "rolloff,SIM-TEST,0001,1.0", QueueLen: queueLen, Reset: func() { td.on = false }})
	ctx := context.Background()
	_ = ctx
	specials := map[string]float64{"MINimum": 1e-3, "MAXimum": 20e6}
	td.MustHandle("[SOURce[1]:]FREQuency[:CW]", func(_ context.Context, c *Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		v, err := c.Float(0, "HZ", specials)
		if err != nil {
			return "", err
		}
		if v < 1e-3 || v > 20e6 {
			return "", Errorf(DataOutOfRange, "%g Hz", v)
		}
		td.freqHz = v
		td.log = append(td.log, fmt.Sprintf("freq %g", v))
		return "", nil
	})
	td.MustHandle("[SOURce[1]:]FREQuency[:CW]?", func(_ context.Context, c *Call) (string, error) {
		return NR3(td.freqHz), c.Arity(0, 0)
	})
	td.MustHandle("[SOURce[1]:]VOLTage[:LEVel][:IMMediate][:AMPLitude]", func(_ context.Context, c *Call) (string, error) {
		n, err := c.Number(0, NumSpec{Unit: "V", AltUnits: []string{"VPP", "VRMS"}})
		if err != nil {
			return "", err
		}
		td.volts = n.V
		td.log = append(td.log, fmt.Sprintf("volt %g %s", n.V, n.Unit))
		return "", nil
	})
	td.MustHandle("[SOURce[1]:]VOLTage:UNIT?", func(_ context.Context, c *Call) (string, error) {
		return "VRMS", nil
	})
	td.MustHandle("[SOURce[1]:]FUNCtion[:SHAPe]", func(_ context.Context, c *Call) (string, error) {
		k, err := c.Choice(0, "SINusoid", "SQUare", "TRIangle")
		if err != nil {
			return "", err
		}
		td.shape = []string{"SIN", "SQU", "TRI"}[k]
		return "", nil
	})
	td.MustHandle("OUTPut[1][:STATe]", func(_ context.Context, c *Call) (string, error) {
		b, err := c.Bool(0)
		td.on = b
		return "", err
	})
	td.MustHandle("OUTPut[1][:STATe]?", func(_ context.Context, c *Call) (string, error) {
		return Bool(td.on), nil
	})
	td.MustHandle("ROUTe:CLOSe", func(_ context.Context, c *Call) (string, error) {
		ch, err := c.Channels(0)
		td.chans = ch
		return "", err
	})
	td.MustHandle("CHANnel[4]:GAIN?", func(_ context.Context, c *Call) (string, error) {
		return NR1(c.Suffixes[0]), nil
	})
	return td
}

func (td *testDevice) exec(msg string) string {
	r, _ := td.Execute(context.Background(), msg)
	return r
}

func (td *testDevice) errs() []string {
	var out []string
	for {
		e := td.NextError()
		if e.Code == 0 {
			return out
		}
		out = append(out, e.Entry())
	}
}

// SCPI-1999 Vol 1 §6.2.1: a mnemonic is accepted in its short or its long
// form, in any case, and in nothing in between.
func TestShortLongCase(t *testing.T) {
	td := newTestDevice(t, 0)
	for _, tc := range []struct {
		msg  string
		want float64
	}{
		{"FREQ 100", 100},
		{"FREQUENCY 200", 200},
		{"frequency 300", 300},
		{"FrEq:Cw 400", 400},
		{"SOUR:FREQ:CW 500", 500},
		{"source1:frequency:fixed 5", 500}, // FIXed is not registered here: -113
		{":SOURce1:FREQuency 600", 600},
		{"SOUR1:FREQ 1kHz", 1000},
		{"FREQ 2 KHZ", 2000},
		{"FREQ 3MHZ", 3e6}, // SCPI-1999 §7.3.3: MHZ is megahertz
		{"FREQ 1.5E+3", 1500},
		{"FREQ 2.5 e 2", 250}, // IEEE 488.2 §7.7.2.2: white space around E
		{"FREQ MAX", 20e6},
		{"FREQ min", 1e-3},
		{"FREQ #H3E8", 1000},
	} {
		td.exec(tc.msg)
		if td.freqHz != tc.want {
			t.Errorf("%q: frequency %g, want %g", tc.msg, td.freqHz, tc.want)
		}
	}
	errs := td.errs()
	if len(errs) != 1 || !strings.HasPrefix(errs[0], `-113,"Undefined header`) {
		t.Errorf("errors %q, want one -113 for the unregistered FIXed node", errs)
	}
	for _, bad := range []string{"FREQU 100", "FRE 100", "SOURC:FREQ 100"} {
		td.exec(bad)
		if e := td.NextError(); e.Code != UndefinedHeader {
			t.Errorf("%q: error %d, want -113 (intermediate forms are not accepted)", bad, e.Code)
		}
	}
	if got := td.exec("freq?"); got != "+5.00000000E+00" && got != NR3(td.freqHz) {
		t.Errorf("FREQ? = %q", got)
	}
}

// IEEE 488.2 §7.7.3.2: suffix multipliers; M is milli, MA mega.
func TestSuffixMultipliers(t *testing.T) {
	td := newTestDevice(t, 0)
	for _, tc := range []struct {
		msg, want string
	}{
		{"VOLT 100mV", "volt 0.1 V"},
		{"VOLT 2 VPP", "volt 2 VPP"},
		{"VOLT 50 MVPP", "volt 0.05 VPP"},
		{"VOLT 1uV", "volt 1e-06 V"},
		{"VOLT 3", "volt 3 "},
		{"VOLT 1 MAV", "volt 1e+06 V"},
	} {
		td.log = nil
		td.exec(tc.msg)
		if len(td.log) != 1 || td.log[0] != tc.want {
			t.Errorf("%q: %q, want %q (errors %q)", tc.msg, td.log, tc.want, td.errs())
		}
	}
	td.exec("VOLT 1 HZ")
	if e := td.NextError(); e.Code != InvalidSuffix {
		t.Errorf("wrong unit: %d, want -131", e.Code)
	}
	td.exec("OUTP 1V")
	if e := td.NextError(); e.Code != SuffixNotAllowed {
		t.Errorf("suffix on boolean: %d, want -138", e.Code)
	}
}

// IEEE 488.2 §A.1.1, SCPI-1999 §6.2.4: in a compound message a header
// without a leading colon is relative to the previous header's path;
// a leading colon returns to the root; common commands keep the path.
func TestCompoundMessages(t *testing.T) {
	td := newTestDevice(t, 0)
	if got := td.exec("FREQ 1000;FREQ?"); got != "+1.00000000E+03" {
		t.Errorf("FREQ 1000;FREQ? = %q", got)
	}
	if got := td.exec("SOUR:FREQ 2000;VOLT 1;*IDN?;FREQ?"); got != "rolloff,SIM-TEST,0001,1.0;+2.00000000E+03" {
		t.Errorf("relative path after SOUR:FREQ: %q", got)
	}
	if td.volts != 1 {
		t.Errorf("SOUR:...;VOLT 1 did not resolve to SOUR:VOLT (%g)", td.volts)
	}
	// After OUTP:STAT the path is OUTP, so "FREQ" means OUTP:FREQ.
	td.exec("OUTP:STAT ON;FREQ 5")
	if e := td.NextError(); e.Code != UndefinedHeader {
		t.Errorf("OUTP:STAT ON;FREQ 5 gave %d, want -113 (FREQ relative to OUTP)", e.Code)
	}
	td.exec("OUTP:STAT OFF;:FREQ 7")
	if td.freqHz != 7 || td.on {
		t.Errorf("leading colon did not return to root: freq %g on %v", td.freqHz, td.on)
	}
	if got := td.exec("OUTP?;:FREQ?;*OPC?"); got != "0;+7.00000000E+00;1" {
		t.Errorf("three queries: %q", got)
	}
	if got := td.exec(`FUNC SQU;FUNC TRIANGLE;OUTP ON;`); got != "" || td.shape != "TRI" || !td.on {
		t.Errorf("trailing semicolon: %q shape %s on %v", got, td.shape, td.on)
	}
}

// SCPI-1999 §21.8.9: an unknown header is -113 "Undefined header"; the
// queue answers 0,"No error" when empty.
func TestUndefinedHeaderAndQueue(t *testing.T) {
	td := newTestDevice(t, 0)
	td.exec("FROB 1")
	if got := td.exec("SYST:ERR?"); got != `-113,"Undefined header;FROB"` {
		t.Errorf("SYST:ERR? = %q", got)
	}
	if got := td.exec("SYSTEM:ERROR:NEXT?"); got != `0,"No error"` {
		t.Errorf("empty queue: %q", got)
	}
	td.exec("*IDN")
	td.exec("*FOO?")
	if got := td.exec("SYST:ERR:COUN?"); got != "2" {
		t.Errorf("count %q, want 2", got)
	}
	td.exec("*CLS")
	if got := td.exec("SYST:ERR:COUN?"); got != "0" {
		t.Errorf("count after *CLS %q", got)
	}
	if got := td.exec("SYST:VERS?"); got != "1999.0" {
		t.Errorf("SYST:VERS? = %q", got)
	}
	td.exec("CHAN5:GAIN?")
	if e := td.NextError(); e.Code != HeaderSuffixRange {
		t.Errorf("CHAN5 gave %d, want -114", e.Code)
	}
	if got := td.exec("CHAN3:GAIN?;:CHAN:GAIN?"); got != "3;1" {
		t.Errorf("numeric suffix: %q", got)
	}
}

// SCPI-1999 §21.8.1: when the queue is full the newest entry is replaced
// by -350 "Queue overflow"; the oldest entries are kept.
func TestQueueOverflow(t *testing.T) {
	td := newTestDevice(t, 5)
	for i := 0; i < 9; i++ {
		td.exec(fmt.Sprintf("BAD%d", i))
	}
	errs := td.errs()
	if len(errs) != 5 {
		t.Fatalf("%d entries, want 5: %q", len(errs), errs)
	}
	for i := 0; i < 4; i++ {
		if !strings.Contains(errs[i], fmt.Sprintf("BAD%d", i)) {
			t.Errorf("entry %d = %q, want the oldest errors kept", i, errs[i])
		}
	}
	if errs[4] != `-350,"Queue overflow"` {
		t.Errorf("last entry %q", errs[4])
	}
}

// IEEE 488.2 §11.5.1.1: error classes set ESR bits; *ESR? clears them.
func TestStatusRegisters(t *testing.T) {
	td := newTestDevice(t, 0)
	td.exec("*ESR?") // clear power-on
	td.exec("FROB")
	td.exec("FREQ 1e12")
	if got := td.exec("*ESR?"); got != fmt.Sprint(int(ESRCommandError|ESRExecutionError)) {
		t.Errorf("*ESR? = %s, want CME|EXE = 48", got)
	}
	if got := td.exec("*ESR?"); got != "0" {
		t.Errorf("*ESR? not cleared: %s", got)
	}
	if got := td.exec("*STB?"); got != "4" {
		t.Errorf("*STB? = %s, want 4 (EAV: two errors queued)", got)
	}
	td.exec("*ESE 32;*OPC;FROB")
	if got := td.exec("*STB?;*ESE?"); got != "36;32" {
		t.Errorf("*STB?;*ESE? = %s, want 36;32", got)
	}
	td.exec("*ESE 300")
	if e := td.errs(); len(e) < 4 || !strings.HasPrefix(e[len(e)-1], "-222") {
		t.Errorf("*ESE 300: %q, want -222 last", e)
	}
	td.exec("OUTP ON;*RST")
	if td.on {
		t.Errorf("*RST did not call the reset hook")
	}
}

func TestDataErrors(t *testing.T) {
	td := newTestDevice(t, 0)
	for _, tc := range []struct {
		msg  string
		code int
	}{
		{`FREQ "abc"`, DataTypeError},
		{"FREQ ABC", DataTypeError},
		{"FREQ 1e12", DataOutOfRange},
		{"FREQ", MissingParameter},
		{"FREQ 1,2", ParameterNotAllowed},
		{"FREQ 1..2", NumericDataError},
		{"FREQ ,", SyntaxError},
		{"FUNC PULSE", IllegalParameter},
		{"FUNC 3", DataTypeError},
		{"OUTP MAYBE", IllegalParameter},
		{`FREQ "unterminated`, InvalidStringData},
		{"ROUT:CLOS (@1", InvalidExpression},
		{"ROUT:CLOS (@a)", InvalidExpression},
		{"FREQ#1", HeaderSeparator},
		{"FREQ 1 $", NumericDataError},
		{"FREQ 1 K$", InvalidSuffix},
		{"VERYLONGMNEMONIC 1", MnemonicTooLong},
	} {
		before := td.freqHz
		td.exec(tc.msg)
		e := td.NextError()
		if e.Code != tc.code {
			t.Errorf("%q: error %d %q, want %d", tc.msg, e.Code, e.Msg, tc.code)
		}
		if td.freqHz != before {
			t.Errorf("%q changed the frequency", tc.msg)
		}
		td.Clear()
	}
}

// SCPI-1999 Vol 1 §8.3.2: channel lists with ranges.
func TestChannelList(t *testing.T) {
	td := newTestDevice(t, 0)
	td.exec("ROUT:CLOS (@1,3:5)")
	if fmt.Sprint(td.chans) != "[1 3 4 5]" {
		t.Errorf("channels %v", td.chans)
	}
	td.exec("ROUT:CLOS (@ 2 )")
	if fmt.Sprint(td.chans) != "[2]" {
		t.Errorf("channels %v", td.chans)
	}
}

// IEEE 488.2 §8.7.4 NR3, SCPI-1999 §7.2.1.5 overflow value.
func TestNR3(t *testing.T) {
	for v, want := range map[float64]string{
		0.948683:  "+9.48683000E-01",
		-1.5e-6:   "-1.50000000E-06",
		0:         "+0.00000000E+00",
		Overflow:  "+9.90000000E+37",
		123456789: "+1.23456789E+08",
	} {
		if got := NR3(v); got != want {
			t.Errorf("NR3(%g) = %q, want %q", v, got, want)
		}
	}
}

func TestPatternErrors(t *testing.T) {
	d := New(Opts{})
	for _, p := range []string{"", "[FOO", "foo", "*", "FOO[0]", "[1]FOO"} {
		if err := d.Handle(p, func(context.Context, *Call) (string, error) { return "", nil }); err == nil {
			t.Errorf("pattern %q accepted", p)
		}
	}
}

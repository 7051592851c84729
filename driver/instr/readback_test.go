package instr

import (
	"context"
	"errors"
	"strings"
	"testing"

	"rolloff/driver"
	"rolloff/driver/scpi"
	"rolloff/driver/transport/replay"
)

// inline is a session replaying a transcript given as text.
func inline(t *testing.T, text string) *scpi.Session {
	t.Helper()
	tr, err := replay.ParseString(t.Name(), text)
	if err != nil {
		t.Fatal(err)
	}
	sess := scpi.New(replay.NewPlayback(tr), nil)
	t.Cleanup(func() {
		if err := sess.Close(); err != nil {
			t.Errorf("transcript: %v", err)
		}
	})
	return sess
}

var readbackEdits = []string{
	`query_frequency = ""`, `query_frequency = "SOURce:FREQuency?"`,
	`query_amplitude = ""`, `query_amplitude = "SOURce:VOLTage?"`,
	`check_errors = true`, `check_errors = false`,
}

// TestReadbackMatches: each setting is read back; answers within the
// tolerance pass.
func TestReadbackMatches(t *testing.T) {
	p := genProfile(t, readbackEdits...)
	g, err := NewGenerator(inline(t, `
> SOURce:VOLTage 0.5
> SOURce:VOLTage?
< +5.0001E-01
> SOURce:FREQuency 1000
> SOURce:FREQuency?
< 1.000000E+03
`), p, bench)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	if err := g.SetAmplitude(ctx, 0.5); err != nil {
		t.Fatal(err)
	}
	if err := g.SetFrequency(ctx, 1000); err != nil {
		t.Fatal(err)
	}
}

// TestReadbackMismatch: an amplitude read back 2 % off (another controller,
// a front-panel change) switches the output off and fails with the
// values, wrapping driver.ErrReadback; so does a frequency.
func TestReadbackMismatch(t *testing.T) {
	ctx := context.Background()
	p := genProfile(t, readbackEdits...)
	g, err := NewGenerator(inline(t, `
> SOURce:VOLTage 0.5
> SOURce:VOLTage?
< 0.51
> OUTPut OFF
> SOURce:FREQuency 1000
> SOURce:FREQuency?
< 100
> OUTPut OFF
`), p, bench)
	if err != nil {
		t.Fatal(err)
	}
	err = g.SetAmplitude(ctx, 0.5)
	var re *ReadbackError
	if !errors.Is(err, driver.ErrReadback) || !errors.As(err, &re) || driver.Transient(err) {
		t.Fatalf("SetAmplitude = %v; want a non-transient ReadbackError", err)
	}
	if re.Sent != 0.5 || re.Got != 0.51 || !strings.Contains(err.Error(), "commands.query_amplitude") || !strings.Contains(err.Error(), "output switched off") {
		t.Errorf("error %q", err)
	}
	if err := g.SetFrequency(ctx, 1000); !errors.Is(err, driver.ErrReadback) || !strings.Contains(err.Error(), "read back 100, sent 1000") {
		t.Errorf("SetFrequency = %v", err)
	}
}

// TestApplyTemplate: an apply-style set_frequency carries the amplitude
// last set (the smallest allowed before the first) and the offset.
func TestApplyTemplate(t *testing.T) {
	ctx := context.Background()
	p := genProfile(t,
		`set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "APPLy:SINusoid {freq_hz},{amplitude},{offset_v}"`,
		"offset_v = 0.0", "offset_v = 0.1", `set_offset = ""`, `set_offset = "SOURce:VOLTage:OFFSet {offset_v}"`,
		`check_errors = true`, `check_errors = false`, "min_amplitude = 0.0", "min_amplitude = 0.001")
	g, err := NewGenerator(inline(t, `
> APPLy:SINusoid 1000,0.001,0.1
> SOURce:VOLTage 0.5
> APPLy:SINusoid 2000,0.5,0.1
`), p, bench)
	if err != nil {
		t.Fatal(err)
	}
	if err := g.SetFrequency(ctx, 1000); err != nil {
		t.Fatal(err)
	}
	if err := g.SetAmplitude(ctx, 0.5); err != nil {
		t.Fatal(err)
	}
	if err := g.SetFrequency(ctx, 2000); err != nil {
		t.Fatal(err)
	}
	// 0.1 V of DC at a hi-z DUT leaves √(1 − 0.1²) of the bench's 1 Vrms
	// for the sine (RMS of a sine plus DC, handbook formula).
	if got, want := g.Limits().MaxVrms, 0.99498743710662; got-want > 1e-12 || want-got > 1e-12 {
		t.Errorf("MaxVrms with offset = %g, want %g", got, want)
	}
}

// TestApplyTemplateNoLowestLevel: a dBm profile with no lower limit has no
// smallest level to send with the first frequency of an apply-style
// command: the frequency is refused, nothing sent, until an amplitude is
// set (never the highest level in its place).
func TestApplyTemplateNoLowestLevel(t *testing.T) {
	p := genProfile(t, `unit = "vrms"`, "unit = \"dbm\"\ndbm_reference = 50", "min_amplitude = 0.0", "", "max_amplitude = 7.07", "max_amplitude = 23.0",
		`set_frequency = "SOURce:FREQuency {freq_hz}"`, `set_frequency = "APPLy:SINusoid {freq_hz},{amplitude},{offset_v}"`,
		`check_errors = true`, `check_errors = false`)
	g, err := NewGenerator(inline(t, "> SOURce:VOLTage 0\n> APPLy:SINusoid 1000,0,0\n"), p, bench)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	if err := g.SetFrequency(ctx, 1000); !errors.Is(err, driver.ErrOutOfRange) {
		t.Fatalf("first frequency before any amplitude: %v; want a refusal", err)
	}
	// 0 dBm into 50 Ω is 0.2236 Vrms: within the bench's 1 Vrms.
	if err := g.SetAmplitude(ctx, 0.22360679774997896); err != nil {
		t.Fatal(err)
	}
	if err := g.SetFrequency(ctx, 1000); err != nil {
		t.Fatal(err)
	}
}

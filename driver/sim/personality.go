package sim

import (
	"context"
	"fmt"
	"sort"
	"strings"
	"time"

	"rolloff/driver/sim/scpiserver"
)

// Personalities: SCPI dialects a simulated instrument can speak instead
// of its full command set, so that profiles for the instruments people
// have can be tried on the simulated bench. The names are the
// simulator's own.
const (
	// PersonalityPlain: a meter that answers one reading per READ?, with
	// no sample count (SAMPle:COUNt) and no integration-time command
	// (NPLCycles, APERture): it integrates over its reset_nplc.
	PersonalityPlain = "plain"
	// PersonalityInitFetch: a meter without READ? or MEASure?: a reading
	// is INITiate then FETCh?.
	PersonalityInitFetch = "initfetch"
	// PersonalityMeasure: a meter that answers only MEASure:VOLTage:DC?
	// (or :AC?) with an optional range, at its reset_nplc, and the
	// common commands.
	PersonalityMeasure = "measure"
	// PersonalitySuffixed: a meter that writes a unit after each reading
	// ("+1.00000000E-01 VDC"), answers OVLD on an overload, leaves a
	// comma after the last reading of a burst and a 3-field *IDN?.
	PersonalitySuffixed = "suffixed"
	// PersonalitySlow: an instrument that takes 200 ms (wall time) to
	// answer each query and drops its connection every 50 queries.
	PersonalitySlow = "slow"
	// PersonalityApplyVpp: a generator set only with APPLy:SINusoid
	// <freq>,<amplitude>,<offset>, amplitude in Vpp as shown into a
	// 50 Ω load; an omitted parameter takes its reset value (so a
	// profile omitting the amplitude would silently reset the level).
	PersonalityApplyVpp = "apply-vpp"
	// PersonalityOPCMute: a generator whose output is muted for 50 ms
	// (wall time) after a frequency change; *OPC? answers once it is
	// back.
	PersonalityOPCMute = "opc-mute"
)

// MeterPersonalities and GeneratorPersonalities list the dialects each
// kind of simulated instrument accepts ("" is the full command set).
var (
	MeterPersonalities     = []string{PersonalityPlain, PersonalityInitFetch, PersonalityMeasure, PersonalitySuffixed, PersonalitySlow}
	GeneratorPersonalities = []string{PersonalityApplyVpp, PersonalityOPCMute, PersonalitySlow}
)

// Personality constants.
const (
	slowAnswer    = 200 * time.Millisecond
	slowDropEvery = 50
	muteAfterFreq = 50 * time.Millisecond
	applyVppLoad  = 50 // Ω: the apply-vpp generator shows its amplitude into 50 Ω
)

func validPersonality(list []string, p string) bool {
	if p == "" {
		return true
	}
	for _, x := range list {
		if x == p {
			return true
		}
	}
	return false
}

func personalitiesAllowed(list []string) string {
	l := append([]string(nil), list...)
	sort.Strings(l)
	return `"" (the full command set) or "` + strings.Join(l, `", "`) + `"`
}

// restrictMeter removes the commands a meter personality lacks.
func restrictMeter(d *scpiserver.Device, personality string) {
	switch personality {
	case PersonalityPlain:
		d.Remove(func(pat string) bool {
			return strings.HasPrefix(pat, "SAMPle:") || strings.Contains(pat, ":NPLCycles") || strings.Contains(pat, ":APERture")
		})
	case PersonalityInitFetch:
		d.Remove(func(pat string) bool { return pat == "READ?" || strings.HasPrefix(pat, "MEASure") })
	case PersonalityMeasure:
		d.Remove(func(pat string) bool {
			return !strings.HasPrefix(pat, "*") && !strings.HasPrefix(pat, "SYSTem:") && !strings.HasPrefix(pat, "MEASure")
		})
	}
}

// answer formats readings as the meter's personality writes them: NR3
// list (IEEE 488.2 §8.7.4), or for the suffixed meter each with its unit
// (VDC, VAC), OVLD for an overload and a comma after the last of a burst.
func (m *meter) answer(r []float64) string {
	if m.personality != PersonalitySuffixed {
		return scpiserver.NR3List(r)
	}
	unit := " VDC"
	if m.kind == acMeter {
		unit = " VAC"
	}
	parts := make([]string, len(r))
	for i, v := range r {
		t := scpiserver.NR3(v)
		if isOverflowText(t) {
			parts[i] = "OVLD"
		} else {
			parts[i] = t + unit
		}
	}
	out := strings.Join(parts, ",")
	if len(parts) > 1 {
		out += ","
	}
	return out
}

func isOverflowText(s string) bool {
	s = strings.TrimSpace(s)
	return s == scpiserver.NR3(scpiserver.Overflow) || s == scpiserver.NR3(scpiserver.NegativeOver)
}

// suffixedIDN is the 3-field identity of the suffixed meter: the
// firmware field is left out.
func suffixedIDN(idn string) string {
	f := strings.Split(idn, ",")
	if len(f) == 4 {
		return strings.Join(f[:3], ",")
	}
	return idn
}

// slowAnswerDelay delays an answer of the slow personality and says
// whether the connection drops after it (every 50th query).
func (in *instrument) slowAnswer() (delay time.Duration, drop bool) {
	if in.personality != PersonalitySlow {
		return 0, false
	}
	in.recMu.Lock()
	in.queries++
	n := in.queries
	in.recMu.Unlock()
	return slowAnswer, n%slowDropEvery == 0
}

// applyVppCommands replaces the generator's setting commands by the
// apply-style one of the apply-vpp personality.
func (b *Bench) applyVppCommands(d *scpiserver.Device) {
	d.Remove(func(pat string) bool {
		return strings.Contains(pat, "FREQuency") || strings.Contains(pat, "VOLTage") || strings.Contains(pat, "OUTPut[1]:LOAD") || pat == "APPLy:SINusoid"
	})
	gc := &b.cfg.Generator
	d.MustHandle("APPLy:SINusoid", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(0, 3); err != nil {
			return "", err
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		// An omitted parameter takes its reset value, whatever was set.
		g := b.gen
		g.freqHz, g.vrms, g.offsetV = gc.ResetFreqHz, gc.ResetVrms, 0
		if len(c.Args) > 0 {
			f, err := c.Float(0, "HZ", nil)
			if err != nil {
				return "", err
			}
			if f < gc.MinFreqHz || f > gc.MaxFreqHz {
				return "", scpiserver.Errorf(scpiserver.DataOutOfRange, "%g Hz not in %g..%g", f, gc.MinFreqHz, gc.MaxFreqHz)
			}
			g.freqHz = f
		}
		if len(c.Args) > 1 {
			a, err := c.Float(1, "VPP", nil)
			if err != nil {
				return "", err
			}
			vrms := toVrms(a, unitVpp, g.shape, 0)
			if !(vrms >= gc.MinVrms*(1-1e-12) && vrms <= gc.MaxVrms*(1+1e-12)) {
				return "", scpiserver.Errorf(scpiserver.DataOutOfRange, "%g Vpp not in %g..%g", a, fromVrms(gc.MinVrms, unitVpp, g.shape, 0), fromVrms(gc.MaxVrms, unitVpp, g.shape, 0))
			}
			g.vrms = vrms
		}
		if len(c.Args) > 2 {
			v, err := c.Float(2, "V", nil)
			if err != nil {
				return "", err
			}
			if v < -maxOffsetV || v > maxOffsetV {
				return "", scpiserver.Errorf(scpiserver.DataOutOfRange, "%g V offset not in ±%d", v, maxOffsetV)
			}
			g.offsetV = v
		}
		b.gen = g
		b.applyLocked(b.now())
		return "", nil
	})
	d.MustHandle("APPLy?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		b.mu.Lock()
		defer b.mu.Unlock()
		g := b.gen
		return fmt.Sprintf(`"SIN %s,%s,%s"`, scpiserver.NR3(g.freqHz), scpiserver.NR3(fromVrms(g.vrms, unitVpp, g.shape, 0)), scpiserver.NR3(g.offsetV)), c.Arity(0, 0)
	})
}

// opcMuteCommands makes *OPC? wait for the end of the mute that follows
// a frequency change.
func (b *Bench) opcMuteCommands(d *scpiserver.Device) {
	d.Remove(func(pat string) bool { return pat == "*OPC?" })
	d.MustHandle("*OPC?", func(ctx context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		b.mu.Lock()
		until := b.muteUntil
		b.mu.Unlock()
		if d := time.Until(until); d > 0 {
			t := time.NewTimer(d)
			defer t.Stop()
			select {
			case <-t.C:
			case <-ctx.Done():
				return "", scpiserver.Errorf(scpiserver.ExecutionError, "aborted")
			}
		}
		// The output is back before the answer says so: the timer that
		// ends the mute may not have run yet on a loaded machine.
		b.mu.Lock()
		if !b.closed {
			b.applyLocked(b.now())
		}
		b.mu.Unlock()
		return "1", nil
	})
}

// muteOnFreqChangeLocked starts the opc-mute generator's mute when the
// frequency changed since the last call, and says whether the output is
// muted now.
func (b *Bench) muteOnFreqChangeLocked() bool {
	if b.cfg.Generator.Personality != PersonalityOPCMute {
		return false
	}
	if b.gen.freqHz != b.muteFreqHz {
		b.muteFreqHz = b.gen.freqHz
		b.muteUntil = time.Now().Add(muteAfterFreq)
		time.AfterFunc(muteAfterFreq, func() {
			b.mu.Lock()
			defer b.mu.Unlock()
			if !b.closed {
				b.applyLocked(b.now())
			}
		})
	}
	return time.Now().Before(b.muteUntil)
}

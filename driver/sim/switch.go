package sim

import (
	"context"
	"strconv"
	"strings"

	"rolloff/driver/sim/scpiserver"
)

// switchCommands registers the range switch's command set: one relay
// channel per converter range, channel n = range index + 1, at most one
// closed at a time.
func (b *Bench) switchCommands(in *instrument) {
	d := in.dev
	n := len(b.cfg.Converter.Ranges)
	in.reset = func() {
		// *RST opens every relay (SCPI-1999 Vol 2 ROUTe: the reset state
		// is all channels open): the converter input is disconnected.
		b.mu.Lock()
		defer b.mu.Unlock()
		b.conv.SelectRange(b.now(), -1)
	}
	channels := func(c *scpiserver.Call) ([]int, error) {
		chans, err := c.Channels(0)
		if err != nil {
			return nil, err
		}
		for _, ch := range chans {
			if ch < 1 || ch > n {
				return nil, scpiserver.Errorf(scpiserver.DataOutOfRange, "channel %d not in 1..%d", ch, n)
			}
		}
		return chans, nil
	}
	closed := func() int {
		b.mu.Lock()
		defer b.mu.Unlock()
		return b.conv.Range() + 1
	}
	states := func(chans []int, want bool) string {
		cur := closed()
		parts := make([]string, len(chans))
		for i, ch := range chans {
			parts[i] = scpiserver.Bool((ch == cur) == want)
		}
		return strings.Join(parts, ",")
	}
	d.MustHandle("ROUTe:CLOSe", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		chans, err := channels(c)
		if err != nil {
			return "", err
		}
		if len(chans) != 1 {
			return "", scpiserver.Errorf(scpiserver.IllegalParameter, "close exactly one channel (closing one opens the others)")
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		b.conv.SelectRange(b.now(), chans[0]-1)
		return "", nil
	})
	d.MustHandle("ROUTe:CLOSe?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		chans, err := channels(c)
		if err != nil {
			return "", err
		}
		return states(chans, true), nil
	})
	d.MustHandle("ROUTe:CLOSe:STATe?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		if ch := closed(); ch > 0 {
			return "(@" + strconv.Itoa(ch) + ")", nil
		}
		return "(@)", nil
	})
	d.MustHandle("ROUTe:OPEN", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		chans, err := channels(c)
		if err != nil {
			return "", err
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		for _, ch := range chans {
			if ch == b.conv.Range()+1 {
				b.conv.SelectRange(b.now(), -1)
			}
		}
		return "", nil
	})
	d.MustHandle("ROUTe:OPEN?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		chans, err := channels(c)
		if err != nil {
			return "", err
		}
		return states(chans, false), nil
	})
	d.MustHandle("ROUTe:OPEN:ALL", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		b.conv.SelectRange(b.now(), -1)
		return "", nil
	})
}

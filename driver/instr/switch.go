package instr

import (
	"context"
	"fmt"
	"sync/atomic"
	"time"

	"rolloff/driver"
	"rolloff/driver/profile"
	"rolloff/driver/scpi"
)

// Switch is a SCPI switch or relay instrument driven from a profile.
type Switch struct {
	link
	mu     lock
	p      *profile.Switch
	closed atomic.Int64 // channel last closed, 0 when none or unknown
}

var _ driver.Identifier = (*Switch)(nil)

// NewSwitch returns the switch role of the instrument reached by sess.
// Nothing is sent.
func NewSwitch(sess *scpi.Session, p *profile.Switch) (*Switch, error) {
	if sess == nil || p == nil {
		return nil, fmt.Errorf("instr: NewSwitch: nil session or profile")
	}
	return &Switch{link: link{role: "switch", sess: sess, checkErrors: p.CheckErrors, dialect: p.Dialect}, mu: newLock(), p: p}, nil
}

// Profile returns the switch's profile.
func (s *Switch) Profile() *profile.Switch { return s.p }

// Setup sends the profile's init commands.
func (s *Switch) Setup(ctx context.Context) error {
	if err := s.mu.acquire(ctx); err != nil {
		return fmt.Errorf("switch: %w", err)
	}
	defer s.mu.release()
	return s.sendAll(ctx, s.p.T.Init)
}

// Select opens every channel, closes channel ch (break before make) and
// waits for the relays to settle.
func (s *Switch) Select(ctx context.Context, ch int) error {
	if ch < s.p.MinChannel || ch > s.p.MaxChannel {
		return outOfRange("switch", "channel", float64(ch), fmt.Sprintf("%d to %d (profile %s)", s.p.MinChannel, s.p.MaxChannel, s.p.File))
	}
	if err := s.mu.acquire(ctx); err != nil {
		return fmt.Errorf("switch: %w", err)
	}
	defer s.mu.release()
	s.closed.Store(0)
	if err := s.send(ctx, s.p.T.OpenAll); err != nil {
		return err
	}
	if err := s.send(ctx, s.p.T.Close, scpi.Int("channel", ch)); err != nil {
		return err
	}
	s.closed.Store(int64(ch))
	return sleep(ctx, time.Duration(s.p.SettleS*float64(time.Second)))
}

// OpenAll opens every channel.
func (s *Switch) OpenAll(ctx context.Context) error {
	if err := s.mu.acquire(ctx); err != nil {
		return fmt.Errorf("switch: %w", err)
	}
	defer s.mu.release()
	s.closed.Store(0)
	return s.send(ctx, s.p.T.OpenAll)
}

// Closed returns the channel last closed by Select, 0 when none.
func (s *Switch) Closed() int { return int(s.closed.Load()) }

package profile

import (
	"fmt"

	"rolloff/driver/scpi"
)

// Switch is a SCPI-1999 switch or relay instrument profile (kind
// "scpi-switch"), used to select a converter range remotely.
type Switch struct {
	File     string        `toml:"-"`
	Kind     string        `toml:"kind"`
	Name     string        `toml:"name"`
	Framing  Framing       `toml:"framing"`
	Identity IdentityCheck `toml:"identity"`
	Dialect  Dialect       `toml:"dialect"`
	Response Response      `toml:"response"`
	// MinChannel and MaxChannel bound the channel numbers.
	MinChannel int `toml:"min_channel"`
	MaxChannel int `toml:"max_channel"`
	// SettleS is the relay settling time after a change, seconds.
	SettleS float64 `toml:"settle_s"`
	// CheckErrors reads the error queue after every change.
	CheckErrors bool           `toml:"check_errors"`
	Commands    SwitchCommands `toml:"commands"`
	T           SwitchTmpl     `toml:"-"`
}

// SwitchCommands are the switch's command templates.
type SwitchCommands struct {
	// Init is sent in order after the instrument is cleared.
	Init []string `toml:"init"`
	// Close closes one channel; {channel}. One command or a list.
	Close Cmds `toml:"close"`
	// OpenAll opens every channel. No placeholders.
	OpenAll Cmds `toml:"open_all"`
}

// SwitchTmpl are the compiled switch templates.
type SwitchTmpl struct {
	Init    []*scpi.Template
	Close   *scpi.Seq
	OpenAll *scpi.Seq
}

// DecodeSwitch decodes and validates a switch profile.
func DecodeSwitch(file string, data []byte) (*Switch, error) {
	if err := expectKind(file, data, KindSwitch); err != nil {
		return nil, err
	}
	s := &Switch{File: file}
	if err := decodeStrict(file, data, s); err != nil {
		return nil, err
	}
	p := newProblems(file, data)
	s.validate(p)
	if err := p.err(); err != nil {
		return nil, err
	}
	return s, nil
}

func (s *Switch) validate(p *problems) {
	checkKind(p, s.Kind, KindSwitch)
	s.Framing.validate(p)
	s.Identity.validate(p)
	s.Dialect.validate(p, s.CheckErrors)
	s.Response.validate(p)
	if s.MinChannel < 0 || s.MinChannel > 9999 {
		p.add("min_channel", s.MinChannel, "0 to 9999", "bad channel")
	}
	if s.MaxChannel < s.MinChannel || s.MaxChannel < 1 || s.MaxChannel > 9999 {
		p.add("max_channel", s.MaxChannel, fmt.Sprintf("min_channel (%d) to 9999, at least 1", s.MinChannel), "bad channel range")
	}
	if !finite(s.SettleS) || s.SettleS < 0 || s.SettleS > 10 {
		p.add("settle_s", s.SettleS, "0 to 10 seconds", "bad settling time")
	}
	s.T.Init = compileList(p, "commands.init", s.Commands.Init)
	s.T.Close = compileSeq(p, "commands.close", s.Commands.Close, true, "channel")
	s.T.OpenAll = compileSeq(p, "commands.open_all", s.Commands.OpenAll, true)
}

package bench

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"rolloff/driver/bench/benchlock"
	"rolloff/driver/profile"
)

// LockCommand describes this process in the bench lock files (default:
// the program name and its subcommand, e.g. "rolloff run").
var LockCommand = defaultCommand()

func defaultCommand() string {
	if len(os.Args) == 0 {
		return ""
	}
	s := filepath.Base(os.Args[0])
	if len(os.Args) > 1 && !strings.HasPrefix(os.Args[1], "-") {
		s += " " + os.Args[1]
	}
	return s
}

// Addresses returns the instrument addresses of cfg, with "sim" resolved
// to the simulated bench's loopback addresses when s is not nil (and left
// out otherwise).
func Addresses(cfg *profile.BenchFile, s interface{ Addr(string) string }) []string {
	var out []string
	add := func(role, addr string) {
		if addr == profile.AddressSim {
			if s == nil {
				return
			}
			addr = s.Addr(role)
		}
		if addr != "" {
			out = append(out, addr)
		}
	}
	if r := cfg.Generator; r != nil {
		add(RoleGenerator, r.Address)
	}
	if r := cfg.Voltmeter; r != nil {
		add(RoleVoltmeter, r.Address)
	}
	if r := cfg.Switch; r != nil {
		add(RoleSwitch, r.Address)
	}
	if r := cfg.DMM; r != nil {
		add(RoleDMM, r.Address)
	}
	if r := cfg.Vin; r != nil {
		add(RoleVin, r.Address)
	}
	return out
}

// takeLock locks every instrument address of the bench before any is
// opened (see benchlock): a bench another rolloff process is driving is
// refused before a byte is sent to it.
func (b *Bench) takeLock(cfg *profile.BenchFile) error {
	var s interface{ Addr(string) string }
	if b.Sim != nil {
		s = b.Sim
	}
	l, err := benchlock.Acquire(Addresses(cfg, s), benchlock.Holder{Command: LockCommand})
	if err != nil {
		return fmt.Errorf("bench %s: %w", cfg.File, err)
	}
	b.lock = l
	return nil
}

// SetRunID records the run this process measures on the bench in the
// bench's lock files, so that a refused controller is told which run holds
// the bench.
func (b *Bench) SetRunID(id string) error {
	if b == nil {
		return nil
	}
	return b.lock.SetRun(id)
}

// releaseLock unlocks the bench's addresses (Close).
func (b *Bench) releaseLock() {
	if b.lock != nil {
		_ = b.lock.Release()
	}
}

package reliability

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"github.com/creack/pty"
	"github.com/rs/zerolog"
	"golang.org/x/term"

	"rolloff/driver/bench"
	"rolloff/driver/sim"
	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/sched"
	"rolloff/sweep/store"
)

// hotplug is a serial device that can be unplugged and plugged back, as a
// USB-serial adapter is: a pseudo-terminal of its own, reached through a
// stable symbolic link (as udev's /dev/serial/by-id links are), relaying
// bytes to and from the simulator's pseudo-terminal. Unplugging closes the
// terminal (the open port hangs up: reads end, writes fail) and removes
// the link (opening it fails); plugging makes a new terminal and points
// the link at it.
//
// The simulator serves a pseudo-terminal that cannot hang up or vanish
// (its Gone only ignores input), so the disappearance is made here, in
// front of it. The instrument itself keeps its state while unplugged, as a
// real one on its own power does.
type hotplug struct {
	t    *testing.T
	link string
	dev  *os.File // the simulator's terminal, opened as its client

	mu     sync.Mutex
	master *os.File // nil while unplugged
	slave  *os.File
	plugs  int
	wg     sync.WaitGroup
}

func newHotplug(t *testing.T, devPath, link string) *hotplug {
	t.Helper()
	dev, err := os.OpenFile(devPath, os.O_RDWR|syscall.O_NOCTTY, 0)
	if err != nil {
		t.Fatalf("open the simulator's terminal %s: %v", devPath, err)
	}
	h := &hotplug{t: t, link: link, dev: dev}
	h.wg.Add(1)
	go h.fromDevice()
	if err := h.plug(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		h.unplug()
		dev.Close()
		h.wg.Wait()
	})
	return h
}

// fromDevice relays the instrument's answers to the plugged terminal; with
// none plugged they are lost, as on a cable pulled out.
func (h *hotplug) fromDevice() {
	defer h.wg.Done()
	buf := make([]byte, 4096)
	for {
		n, err := h.dev.Read(buf)
		if n > 0 {
			h.mu.Lock()
			m := h.master
			h.mu.Unlock()
			if m != nil {
				_, _ = m.Write(buf[:n])
			}
		}
		if err != nil {
			return
		}
	}
}

// plug makes a new terminal and points the link at it.
func (h *hotplug) plug() error {
	master, slave, err := pty.Open()
	if err != nil {
		return fmt.Errorf("pty: %w", err)
	}
	if _, err := term.MakeRaw(int(slave.Fd())); err != nil {
		master.Close()
		slave.Close()
		return fmt.Errorf("raw mode: %w", err)
	}
	// A non-blocking duplicate of the master goes through the runtime
	// poller, so that closing it wakes the relay blocked reading it.
	fd, err := syscall.Dup(int(master.Fd()))
	if err == nil {
		err = syscall.SetNonblock(fd, true)
	}
	if err != nil {
		master.Close()
		slave.Close()
		return fmt.Errorf("pty master: %w", err)
	}
	m := os.NewFile(uintptr(fd), master.Name())
	master.Close()
	tmp := h.link + ".new"
	os.Remove(tmp)
	if err := os.Symlink(slave.Name(), tmp); err != nil {
		m.Close()
		slave.Close()
		return err
	}
	if err := os.Rename(tmp, h.link); err != nil {
		m.Close()
		slave.Close()
		return err
	}
	h.mu.Lock()
	h.master, h.slave = m, slave
	h.plugs++
	h.mu.Unlock()
	h.wg.Add(1)
	go func() {
		defer h.wg.Done()
		_, _ = io.Copy(h.dev, m) // the client's commands to the instrument
	}()
	return nil
}

// unplug removes the link and closes the terminal.
func (h *hotplug) unplug() {
	h.mu.Lock()
	m, s := h.master, h.slave
	h.master, h.slave = nil, nil
	h.mu.Unlock()
	os.Remove(h.link)
	if m != nil {
		m.Close()
		s.Close()
	}
}

// TestSerialGeneratorUnplugged drives the generator over a serial port
// that disappears in the middle of the sweep and comes back under the
// same path within the retry budget: the transport opens the device
// again, and the run completes with every point stored once and the
// output off.
func TestSerialGeneratorUnplugged(t *testing.T) {
	t.Parallel()
	safe(t, func(t *testing.T) {
		const scale = 100
		s := startSim(t, scale)
		devPath, err := s.ServeSerial(sim.RoleGenerator)
		if err != nil {
			t.Skipf("no pseudo-terminal for the serial generator: %v", err)
		}
		dir := t.TempDir()
		link := filepath.Join(dir, "ttyGEN0")
		h := newHotplug(t, devPath, link)
		benchFile := writeTCPBench(t, dir, s.Addr, "serial://"+link+"?baud=115200")
		cfg, err := bench.Load(benchFile)
		if err != nil {
			t.Fatal(err)
		}
		ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
		b, err := bench.Open(ctx, cfg, zerolog.Nop())
		cancel()
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { b.Close() })
		st, err := store.Open(filepath.Join(dir, "runs"))
		if err != nil {
			t.Fatal(err)
		}
		g := &rig{t: t, cfg: cfg, b: b, sim: s, st: st, dir: st.Dir(), scale: scale}
		p, freqs := loadPlan(t, "plan.toml", planTOML, b)
		before := len(s.Received(sim.RoleGenerator))
		var outage atomic.Int64
		var onAtUnplug atomic.Bool
		res := g.sweep(context.Background(), p, planTOML, sched.Opts{}, func(n int, _ point.Point, _ *sched.Run) {
			if n == 3 {
				onAtUnplug.Store(s.OutputOn())
				h.unplug()
				start := time.Now()
				time.AfterFunc(700*time.Millisecond, func() {
					if err := h.plug(); err != nil {
						t.Errorf("plugging back: %v", err)
					}
					outage.Store(int64(time.Since(start)))
				})
			}
		})
		h.mu.Lock()
		plugs := h.plugs
		h.mu.Unlock()
		if plugs < 2 {
			t.Fatalf("the device was never unplugged and plugged back (%d plugs); run %s: %v", plugs, res.state, res.err)
		}
		tally.faults.Add(1)
		if len(s.Received(sim.RoleGenerator)) <= before {
			t.Fatal("the generator received nothing over the serial port")
		}
		st2 := verifyRun(t, res.dir, expect{freqs: freqs, acked: res.acked, off: g.outputOff,
			final: []event.State{event.Done}, note: logf(t, "serial")})
		rf := readRunFiles(t, res.dir)
		msg, logged := rf.mentions("disconnected")
		if st2 == event.Done && !logged {
			t.Errorf("the run completed but no event mentions the lost serial port")
		}
		t.Logf("serial generator unplugged for %v (output on: %v): run %s, %q", time.Duration(outage.Load()).Round(time.Millisecond), onAtUnplug.Load(), st2, msg)
	})
}

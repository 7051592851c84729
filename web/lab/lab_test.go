package lab

import (
	"bufio"
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime/pprof"
	"syscall"
	"testing"
	"time"

	"github.com/rs/zerolog"

	"rolloff/sweep/publish"
	"rolloff/sweep/publish/brokertest"
	"rolloff/sweep/store"
)

// TestThreeBenches: three simulated benches publish at once into one
// broker; the lab holds every point of every run once, with its state
// and result, and shows each bench online.
func TestThreeBenches(t *testing.T) {
	br := brokertest.Start(t, brokertest.Opts{})
	b := publish.Broker{URL: br.URL()}
	l := startLab(t, b)
	waitFor(t, 10*time.Second, "lab subscribed", l.BrokerConnected)
	live := dialLive(t, l.Addr())
	type bench struct {
		id   string
		st   *store.Store
		pub  *publish.Publisher
		run  string
		done chan struct{}
	}
	var bs []*bench
	for i := range 3 {
		x := &bench{id: fmt.Sprintf("bench-%d", i+1)}
		x.pub, x.st = startBench(t, b, x.id)
		bs = append(bs, x)
	}
	for i, x := range bs {
		x.run, x.done = simSweep(t, x.st, "line driver "+x.id, 40+10*i, 5*time.Millisecond)
	}
	total := 0
	for i, x := range bs {
		<-x.done
		total += 40 + 10*i
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		if err := x.pub.Flush(ctx); err != nil {
			t.Fatalf("%s: %v", x.id, err)
		}
		cancel()
	}
	for _, x := range bs {
		waitFor(t, 5*time.Second, x.id+" result in the lab", func() bool {
			r := labRun(l.Snapshot(), x.id, x.run)
			return r != nil && len(r.Result) > 0 && r.State != nil && r.State.State == "done"
		})
		checkRun(t, l, x.st, x.id, x.run)
		lb := labBench(l.Snapshot(), x.id)
		if lb.Status == nil || !lb.Status.Online || lb.Status.Run != x.run {
			t.Errorf("%s: status %+v, want online with run %s", x.id, lb.Status, x.run)
		}
	}
	waitFor(t, 5*time.Second, "every point on the websocket", func() bool { return live.count() == total })
}

// TestBrokerRestart kills the broker (SIGKILL: nothing saved) in the
// middle of three runs and starts it again: the lab ends up with every
// point of every run exactly once, and the publishers' acknowledged
// counts reach the stored counts.
func TestBrokerRestart(t *testing.T) {
	br := brokertest.Start(t, brokertest.Opts{})
	b := publish.Broker{URL: br.URL(), KeepAlive: 2 * time.Second}
	l := startLab(t, b)
	waitFor(t, 10*time.Second, "lab subscribed", l.BrokerConnected)
	const n = 120
	var ids []string
	var stores []*store.Store
	var pubs []*publish.Publisher
	var dones []chan struct{}
	for i := range 3 {
		id := fmt.Sprintf("bench-%c", 'a'+i)
		p, st := startBench(t, b, id)
		waitFor(t, 10*time.Second, id+" connected", p.Connected)
		run, done := simSweep(t, st, "line driver", n, 10*time.Millisecond)
		ids, stores, pubs, dones = append(ids, id), append(stores, st), append(pubs, p), append(dones, done)
		_ = run
	}
	// Kill once some points are through, restart a moment later while
	// the sweeps go on.
	waitFor(t, 10*time.Second, "first points in the lab", func() bool {
		s := l.Snapshot()
		for _, id := range ids {
			bn := labBench(s, id)
			if bn == nil || len(bn.Runs) == 0 || len(bn.Runs[0].Points) < 20 {
				return false
			}
		}
		return true
	})
	br.Kill()
	time.Sleep(400 * time.Millisecond)
	br.Restart()
	for _, d := range dones {
		<-d
	}
	for i, p := range pubs {
		ctx, cancel := context.WithTimeout(context.Background(), 15*time.Second)
		if err := p.Flush(ctx); err != nil {
			t.Fatalf("%s: %v", ids[i], err)
		}
		cancel()
	}
	repeats := 0
	for i, id := range ids {
		list, err := stores[i].List()
		if err != nil || len(list) != 1 {
			t.Fatalf("%s: %v %v", id, list, err)
		}
		run := list[0].ID
		if got := pubs[i].Acked(run); got != n {
			t.Errorf("%s: %d points acknowledged, want %d", id, got, n)
		}
		deadline := time.Now().Add(10 * time.Second)
		for {
			r := labRun(l.Snapshot(), id, run)
			if r != nil && len(r.Points) == n && len(r.Result) > 0 && r.State != nil && r.State.State == "done" {
				break
			}
			if time.Now().After(deadline) {
				if r == nil {
					t.Fatalf("%s: run %s not in the lab", id, run)
				}
				seqs := make([]int, 0, len(r.Points))
				for _, p := range r.Points {
					seqs = append(seqs, p.Seq)
				}
				t.Fatalf("%s: run %s in the lab: %d points %v, state %+v, result %s", id, run, len(r.Points), seqs, r.State, r.Result)
			}
			time.Sleep(20 * time.Millisecond)
		}
		checkRun(t, l, stores[i], id, run)
		repeats += labRun(l.Snapshot(), id, run).Repeats
	}
	t.Logf("point messages received again and dropped by seq: %d", repeats)
}

// TestTLSPassword publishes through an mqtts listener whose
// certificate a test CA signs, with a user and password; a wrong
// password and an unknown CA are refused.
func TestTLSPassword(t *testing.T) {
	br := brokertest.Start(t, brokertest.Opts{TLS: true, User: "bench", Password: "s3cret-Test"})
	pwFile := filepath.Join(t.TempDir(), "pw")
	if err := os.WriteFile(pwFile, []byte("s3cret-Test\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	pw, err := publish.ReadPasswordFile(pwFile)
	if err != nil {
		t.Fatal(err)
	}
	b := publish.Broker{URL: br.URL(), CAFile: br.CAFile, User: "bench", Password: pw}
	l := startLab(t, b)
	waitFor(t, 10*time.Second, "lab subscribed over TLS", l.BrokerConnected)
	p, st := startBench(t, b, "tls-bench")
	run, done := simSweep(t, st, "line driver", 30, 2*time.Millisecond)
	<-done
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	if err := p.Flush(ctx); err != nil {
		t.Fatal(err)
	}
	waitFor(t, 5*time.Second, "result in the lab", func() bool {
		r := labRun(l.Snapshot(), "tls-bench", run)
		return r != nil && len(r.Result) > 0 && r.State != nil && r.State.State == "done"
	})
	checkRun(t, l, st, "tls-bench", run)

	// Refused: a wrong password, and no CA (the test CA is not a
	// system one).
	for name, bad := range map[string]publish.Broker{
		"wrong password": {URL: br.URL(), CAFile: br.CAFile, User: "bench", Password: "wrong"},
		"unknown CA":     {URL: br.URL(), User: "bench", Password: pw},
		"anonymous":      {URL: br.URL(), CAFile: br.CAFile},
	} {
		bl, err := New(Config{Broker: bad, Addr: "127.0.0.1:0", Log: zerolog.Nop()})
		if err != nil {
			t.Fatal(err)
		}
		ctx, cancel := context.WithCancel(context.Background())
		served := make(chan error, 1)
		go func() { served <- bl.Serve(ctx) }()
		time.Sleep(700 * time.Millisecond)
		if bl.BrokerConnected() {
			t.Errorf("%s: the broker accepted the lab", name)
		}
		cancel()
		<-served
	}
}

// TestKilledBenchOffline: a bench daemon killed with SIGKILL is shown
// offline (its last will) within the keep-alive: the broker publishes
// the will when it notices the lost connection, at the latest 1.5
// keep-alive periods after the client went silent (MQTT 3.1.1,
// 3.1.2.10). A stopped (SIGSTOP) bench, whose connection stays open
// (a hung or powered-off machine), checks the keep-alive path itself;
// mosquitto looks at keep-alives on a coarser schedule of its own
// (measured: 5.9 s with a 2 s keep-alive, mosquitto 2.0.11), so that
// bound has 5 s more.
func TestKilledBenchOffline(t *testing.T) {
	br := brokertest.Start(t, brokertest.Opts{})
	const keepAlive = 2 * time.Second
	b := publish.Broker{URL: br.URL()}
	l := startLab(t, b)
	waitFor(t, 10*time.Second, "lab subscribed", l.BrokerConnected)
	for id, sig := range map[string]syscall.Signal{"bench-sigkill": syscall.SIGKILL, "bench-sigstop": syscall.SIGSTOP} {
		cmd := exec.Command(os.Args[0], "-test.run=^TestHelperBench$")
		cmd.Env = append(os.Environ(), "ROLLOFF_LAB_HELPER_BROKER="+br.URL(), "ROLLOFF_LAB_HELPER_BENCH="+id,
			"ROLLOFF_LAB_HELPER_STORE="+t.TempDir(), "ROLLOFF_LAB_HELPER_KEEPALIVE="+keepAlive.String())
		cmd.Stderr = os.Stderr
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { _ = cmd.Process.Kill(); _ = cmd.Wait() })
		waitFor(t, 10*time.Second, id+" online in the lab", func() bool {
			bn := labBench(l.Snapshot(), id)
			return bn != nil && bn.Status != nil && bn.Status.Online
		})
		if err := cmd.Process.Signal(sig); err != nil {
			t.Fatal(err)
		}
		killed := time.Now()
		limit := keepAlive*3/2 + time.Second // 1.5 keep-alives, and the broker's check period
		if sig == syscall.SIGSTOP {
			limit += 5 * time.Second
		}
		waitFor(t, limit+time.Second, id+" offline in the lab", func() bool {
			bn := labBench(l.Snapshot(), id)
			return bn != nil && bn.Status != nil && !bn.Status.Online
		})
		took := time.Since(killed)
		t.Logf("%s: offline %v after %s (keep-alive %v)", id, took.Round(time.Millisecond), sig, keepAlive)
		if took > limit {
			t.Errorf("%s: offline after %v, want within %v; broker log:\n%s", id, took, limit, br.Log())
		}
		if bn := labBench(l.Snapshot(), id); bn.Status.Reason != "connection lost" {
			t.Errorf("%s: offline reason %q, want the last will's", id, bn.Status.Reason)
		}
		if sig == syscall.SIGSTOP {
			_ = cmd.Process.Kill()
		}
	}
}

// TestHelperBench is the bench process of TestKilledBenchOffline and of
// the benchmark: a publisher over a store directory, until killed.
func TestHelperBench(t *testing.T) {
	url := os.Getenv("ROLLOFF_LAB_HELPER_BROKER")
	if url == "" {
		t.Skip("helper process only")
	}
	ka, _ := time.ParseDuration(os.Getenv("ROLLOFF_LAB_HELPER_KEEPALIVE"))
	p, err := publish.Start(publish.Config{Broker: publish.Broker{URL: url, KeepAlive: ka},
		BenchID: os.Getenv("ROLLOFF_LAB_HELPER_BENCH"), StoreDir: os.Getenv("ROLLOFF_LAB_HELPER_STORE"), Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	_ = p
	select {}
}

// TestHelperLab is the lab process of the benchmark: it serves a lab
// and prints its address, until killed.
func TestHelperLab(t *testing.T) {
	url := os.Getenv("ROLLOFF_LAB_HELPER_LAB_BROKER")
	if url == "" {
		t.Skip("helper process only")
	}
	l, err := New(Config{Broker: publish.Broker{URL: url}, Addr: "127.0.0.1:0", Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	if prof := os.Getenv("ROLLOFF_LAB_HELPER_CPUPROFILE"); prof != "" {
		// Profile the lab for its first 4 s.
		f, err := os.Create(prof)
		if err != nil {
			t.Fatal(err)
		}
		pprof.StartCPUProfile(f)
		time.AfterFunc(4*time.Second, func() { pprof.StopCPUProfile(); f.Close() })
	}
	go func() {
		for !l.BrokerConnected() {
			time.Sleep(10 * time.Millisecond)
		}
		w := bufio.NewWriter(os.Stdout)
		fmt.Fprintf(w, "lab %s\n", l.Addr())
		w.Flush()
	}()
	_ = l.Serve(context.Background())
}

// TestBrokerLate: the bench measures a whole run while the broker is
// down; once the broker is up, the publisher catches up, and a lab
// started only after the run ended holds every point (from the
// retained blocks), the state and the result.
func TestBrokerLate(t *testing.T) {
	br := brokertest.Start(t, brokertest.Opts{})
	br.Kill()
	b := publish.Broker{URL: br.URL()}
	p, st := startBench(t, b, "late-bench")
	run, done := simSweep(t, st, "line driver", 150, time.Millisecond)
	<-done
	if p.Connected() || p.Acked(run) != 0 {
		t.Fatalf("connected %v, %d acknowledged with no broker", p.Connected(), p.Acked(run))
	}
	br.Restart()
	ctx, cancel := context.WithTimeout(context.Background(), 15*time.Second)
	defer cancel()
	if err := p.Flush(ctx); err != nil {
		t.Fatal(err)
	}
	l := startLab(t, b)
	waitFor(t, 10*time.Second, "late lab complete", func() bool {
		r := labRun(l.Snapshot(), "late-bench", run)
		return r != nil && len(r.Points) == 150 && len(r.Result) > 0 && r.State != nil && r.State.State == "done"
	})
	checkRun(t, l, st, "late-bench", run)
}

// TestOldBlocksCleared: a bench keeps the points of only its newest
// ended runs retained in the broker (KeepBlocks); a lab that starts
// later sees every run's state and result, and the points of those
// runs alone.
func TestOldBlocksCleared(t *testing.T) {
	br := brokertest.Start(t, brokertest.Opts{})
	b := publish.Broker{URL: br.URL()}
	st, err := store.Open(filepath.Join(t.TempDir(), "runs"))
	if err != nil {
		t.Fatal(err)
	}
	p, err := publish.Start(publish.Config{Broker: b, BenchID: "busy", StoreDir: st.Dir(), KeepBlocks: 1, Poll: 20 * time.Millisecond, Log: zerolog.Nop()})
	if err != nil {
		t.Fatal(err)
	}
	defer p.Stop(context.Background())
	var runs []string
	for i := range 3 {
		id, done := simSweep(t, st, fmt.Sprintf("run %d", i), 70, time.Millisecond)
		<-done
		runs = append(runs, id)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	if err := p.Flush(ctx); err != nil {
		t.Fatal(err)
	}
	l := startLab(t, b)
	newest := runs[len(runs)-1]
	waitFor(t, 10*time.Second, "the newest run's points in the late lab", func() bool {
		r := labRun(l.Snapshot(), "busy", newest)
		return r != nil && len(r.Points) == 70
	})
	time.Sleep(300 * time.Millisecond) // anything else retained has arrived by now
	for _, id := range runs[:len(runs)-1] {
		r := labRun(l.Snapshot(), "busy", id)
		if r == nil || r.State == nil || r.State.State != "done" || r.State.Points != 70 || len(r.Result) == 0 {
			t.Errorf("old run %s: %+v, want its state (done, 70 points) and result", id, r)
			continue
		}
		if len(r.Points) != 0 {
			t.Errorf("old run %s: %d points still retained in the broker", id, len(r.Points))
		}
	}
}

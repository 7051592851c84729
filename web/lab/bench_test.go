package lab

import (
	"bufio"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"sort"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"rolloff/sweep/publish"
	"rolloff/sweep/publish/brokertest"
	"rolloff/sweep/store"
)

// BenchmarkLab50 publishes 50 simulated benches (fast time scale: a
// point every 20 ms each, 2500 points/s in all) into one broker, and
// watches them with a lab in its own process. It reports lab-p99-ms,
// the 99th percentile of the time from a point handed to the bench's
// MQTT client to its arrival on the lab page's websocket (target: under
// 50), lab-p50-ms, and the lab process's resident set (lab-rss-mb now,
// lab-peak-rss-mb its peak). $ROLLOFF_LAB_BENCHES sets another number
// of benches, to see how the figures scale.
func BenchmarkLab50(b *testing.B) {
	const points, interval = 80, 40 * time.Millisecond
	benches := 50
	if n, err := strconv.Atoi(os.Getenv("ROLLOFF_LAB_BENCHES")); err == nil {
		benches = n
	}
	br := brokertest.Start(b, brokertest.Opts{})
	bk := publish.Broker{URL: br.URL()}

	cmd := exec.Command(os.Args[0], "-test.run=^TestHelperLab$")
	cmd.Env = append(os.Environ(), "ROLLOFF_LAB_HELPER_LAB_BROKER="+br.URL())
	cmd.Stderr = os.Stderr
	out, err := cmd.StdoutPipe()
	if err != nil {
		b.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { _ = cmd.Process.Kill(); _ = cmd.Wait() })
	addr := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(out)
		for sc.Scan() {
			if a, ok := strings.CutPrefix(sc.Text(), "lab "); ok {
				addr <- a
			}
		}
	}()
	var labAddr string
	select {
	case labAddr = <-addr:
	case <-time.After(20 * time.Second):
		b.Fatal("the lab process did not start")
	}
	live := dialLive(b, labAddr)
	// The broker leg alone, for comparison: a plain subscriber in this
	// process.
	var direct struct {
		sync.Mutex
		ms []float64
	}
	opts, _ := bk.ClientOptions("bench-direct")
	opts.SetDefaultPublishHandler(func(_ mqtt.Client, m mqtt.Message) {
		var p publish.Point
		if json.Unmarshal(m.Payload(), &p) == nil && !p.Sent.IsZero() {
			direct.Lock()
			direct.ms = append(direct.ms, float64(time.Since(p.Sent))/float64(time.Millisecond))
			direct.Unlock()
		}
	})
	dc := mqtt.NewClient(opts)
	if tok := dc.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		b.Fatal(tok.Error())
	}
	if tok := dc.Subscribe(publish.Root+"+/runs/+/points", 1, nil); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		b.Fatal(tok.Error())
	}
	defer dc.Disconnect(100)

	stores := make([]*store.Store, benches)
	for i := range benches {
		_, stores[i] = startBench(b, bk, fmt.Sprintf("bench-%02d", i), 50*time.Millisecond)
	}
	b.ResetTimer()
	for range b.N {
		dones := make([]chan struct{}, benches)
		for i, st := range stores {
			_, dones[i] = simSweep(b, st, "line driver", points, interval)
		}
		for _, d := range dones {
			<-d
		}
	}
	want := benches * points * b.N
	deadline := time.Now().Add(60 * time.Second)
	for live.count() < want && time.Now().Before(deadline) {
		time.Sleep(50 * time.Millisecond)
	}
	b.StopTimer()
	live.mu.Lock()
	lat := append([]time.Duration(nil), live.latencies...)
	live.mu.Unlock()
	if len(lat) < want {
		b.Fatalf("%d of %d points reached the lab page", len(lat), want)
	}
	var fromBlocks int
	ms := make([]float64, 0, len(lat))
	for _, d := range lat {
		if d > time.Hour { // a point the lab had only from a retained block (no send time)
			fromBlocks++
			continue
		}
		ms = append(ms, float64(d)/float64(time.Millisecond))
	}
	sort.Float64s(ms)
	q := func(p float64) float64 { return ms[min(len(ms)-1, int(p*float64(len(ms))))] }
	rss, peak, err := rssKB(cmd.Process.Pid)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportMetric(q(0.99), "lab-p99-ms")
	direct.Lock()
	sort.Float64s(direct.ms)
	if n := len(direct.ms); n > 0 {
		b.ReportMetric(direct.ms[min(n-1, int(0.99*float64(n)))], "broker-p99-ms")
	}
	direct.Unlock()
	b.ReportMetric(q(0.50), "lab-p50-ms")
	b.ReportMetric(q(0.95), "lab-p95-ms")
	b.ReportMetric(q(0.999), "lab-p999-ms")
	b.ReportMetric(float64(rss)/1024, "lab-rss-mb")
	b.ReportMetric(float64(peak)/1024, "lab-peak-rss-mb")
	b.ReportMetric(float64(fromBlocks), "from-blocks")
	if cpu, err := cpuSeconds(cmd.Process.Pid); err == nil {
		b.ReportMetric(cpu, "lab-cpu-s")
	}
	if cpu, err := cpuSeconds(br.Pid()); err == nil {
		b.ReportMetric(cpu, "broker-cpu-s")
	}
	b.ReportMetric(0, "ns/op")
}

// cpuSeconds reads a process's user and system CPU time from
// /proc/PID/stat (fields 14 and 15, in clock ticks of 1/100 s on Linux).
func cpuSeconds(pid int) (float64, error) {
	data, err := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if err != nil {
		return 0, err
	}
	s := string(data)
	f := strings.Fields(s[strings.LastIndexByte(s, ')')+2:])
	if len(f) < 13 {
		return 0, fmt.Errorf("/proc/%d/stat: %d fields", pid, len(f))
	}
	u, err1 := strconv.ParseFloat(f[11], 64)
	st, err2 := strconv.ParseFloat(f[12], 64)
	if err1 != nil || err2 != nil {
		return 0, fmt.Errorf("/proc/%d/stat: %q %q", pid, f[11], f[12])
	}
	return (u + st) / 100, nil
}

package plan_test

import (
	"bytes"
	"runtime"
	"strconv"
	"testing"

	"rolloff/sweep/plan"
)

// bigPlan builds a list plan of just under plan.MaxFileBytes, one
// frequency per line, in TOML or JSON.
func bigPlan(json bool) []byte {
	var b bytes.Buffer
	if json {
		b.WriteString("{\"name\": \"large list\", \"frequencies\": {\"spacing\": \"list\", \"frequencies_hz\": [\n")
	} else {
		b.WriteString("name = \"large list\"\n[frequencies]\nspacing = \"list\"\nfrequencies_hz = [\n")
	}
	tail := "]\n"
	if json {
		tail = "]}}\n"
	}
	for i := 0; ; i++ {
		line := "  " + strconv.FormatFloat(20+float64(i)*0.125, 'f', 3, 64)
		if b.Len()+len(line)+2+len(tail) > plan.MaxFileBytes {
			break
		}
		if i > 0 {
			b.WriteString(",\n")
		}
		b.WriteString(line)
	}
	b.WriteString("\n" + tail)
	return b.Bytes()
}

// BenchmarkDecode1MiB decodes a 1 MiB list plan (about 80 000 entries, one
// per line) and reports the wall time of one decode as ms-1mib (target
// < 100; cpu-ms-1mib is the process CPU time, garbage collection
// included, which depends less on the machine's load) and the heap one decoded plan keeps, per byte of the document,
// as kept-bytes-per-byte.
func BenchmarkDecode1MiB(b *testing.B) {
	for _, tc := range []struct {
		name   string
		json   bool
		decode func(string, []byte) (*plan.Plan, error)
	}{
		{"json", true, plan.DecodeJSON},
		{"toml", false, plan.DecodeTOML},
	} {
		b.Run(tc.name, func(b *testing.B) {
			data := bigPlan(tc.json)
			if len(data) > plan.MaxFileBytes || len(data) < plan.MaxFileBytes-64 {
				b.Fatalf("plan is %d bytes, want just under %d", len(data), plan.MaxFileBytes)
			}
			// The heap one decoded plan keeps, measured once; twice GC
			// because go-toml keeps its parser arena in a sync.Pool,
			// which only the second collection empties.
			var before, after runtime.MemStats
			runtime.GC()
			runtime.GC()
			runtime.ReadMemStats(&before)
			p, err := tc.decode("big."+tc.name, data)
			if err != nil {
				b.Fatal(err)
			}
			runtime.GC()
			runtime.GC()
			runtime.ReadMemStats(&after)
			kept := float64(after.HeapAlloc) - float64(before.HeapAlloc)
			if n := len(p.Frequencies.ListHz); n < 50_000 {
				b.Fatalf("decoded %d frequencies", n)
			}
			runtime.KeepAlive(p)

			cpu0 := cpuTime()
			for b.Loop() {
				if _, err := tc.decode("big."+tc.name, data); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Microseconds())/1e3/float64(b.N), "ms-1mib")
			b.ReportMetric(float64((cpuTime()-cpu0).Microseconds())/1e3/float64(b.N), "cpu-ms-1mib")
			b.ReportMetric(kept/float64(len(data)), "kept-bytes-per-byte")
		})
	}
}

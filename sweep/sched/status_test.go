package sched

import (
	"encoding/json"
	"testing"
	"time"

	"rolloff/sweep/event"
)

func TestStatusWireForm(t *testing.T) {
	// ETA and Elapsed are wall durations in Go and seconds on the wire,
	// under the names they always had.
	st := Status{State: event.Reading, Done: 2, Total: 9, ETA: 12500 * time.Millisecond, Elapsed: 3 * time.Second, Range: "1 V"}
	b, err := json.Marshal(st)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	if m["eta_s"] != 12.5 || m["elapsed_s"] != 3.0 || m["state"] != "reading" || m["range"] != "1 V" || m["done"] != 2.0 {
		t.Fatalf("wire form %s", b)
	}
	if _, ok := m["ETA"]; ok {
		t.Fatalf("Go field name on the wire: %s", b)
	}
}

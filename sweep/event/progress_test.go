package event

import (
	"encoding/json"
	"testing"
	"time"
)

func TestProgressWireForm(t *testing.T) {
	// The wire form keeps the field names and seconds of the stored
	// events.jsonl files and of the page.
	p := Progress{Done: 3, Total: 40, FreqHz: 125.5, ETA: 90*time.Second + 250*time.Millisecond, Elapsed: 1500 * time.Millisecond}
	b, err := json.Marshal(p)
	if err != nil {
		t.Fatal(err)
	}
	const want = `{"done":3,"total":40,"freq_hz":125.5,"eta_s":90.25,"elapsed_s":1.5}`
	if string(b) != want {
		t.Fatalf("got %s, want %s", b, want)
	}
	var q Progress
	if err := json.Unmarshal([]byte(want), &q); err != nil {
		t.Fatal(err)
	}
	if q != p {
		t.Fatalf("round trip %+v, want %+v", q, p)
	}
}

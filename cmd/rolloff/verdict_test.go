package main

import (
	"bytes"
	"encoding/json"
	"testing"
)

func TestPrintMaskVerdict(t *testing.T) {
	var res map[string]any
	json.Unmarshal([]byte(`{"mask":{"name":"acceptance","pass":false,"checked":40,"failed":3,"worst_margin_db":-0.2124,"worst_hz":25.31,"worst_limit":"lower"}}`), &res)
	var b bytes.Buffer
	printMaskVerdict(&b, res)
	want := "mask: FAIL \"acceptance\": 3 of 40 points outside; worst margin -0.212 dB at 25.31 Hz (lower limit)\n"
	if b.String() != want {
		t.Errorf("got %q\nwant %q", b.String(), want)
	}
	b.Reset()
	printMaskVerdict(&b, map[string]any{"low_hz": 8.0})
	if b.Len() != 0 {
		t.Errorf("printed %q without a mask", b.String())
	}
}

package replay

import (
	"context"
	"errors"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"rolloff/driver"
	"rolloff/driver/transport"
	"rolloff/internal/scpitest"
)

func TestParseAndFormat(t *testing.T) {
	text := "# heading\n" +
		"> SOUR:FREQ 1000\r\n" + // a CRLF file line ending is not part of the message
		"< \\x20+1.0E+03\\x20\n" +
		">\n" +
		"<\n" +
		"> A\\\\B\\tC\\r\\n\\x7f\n" +
		"! timeout\n" +
		"   \n" +
		"< trailing space kept \n"
	tr, err := ParseString("t.txt", text)
	if err != nil {
		t.Fatal(err)
	}
	want := []Exchange{
		{Op: OpWrite, Data: []byte("SOUR:FREQ 1000"), Line: 2},
		{Op: OpRead, Data: []byte(" +1.0E+03 "), Line: 3},
		{Op: OpWrite, Line: 4},
		{Op: OpRead, Line: 5},
		{Op: OpWrite, Data: []byte("A\\B\tC\r\n\x7f"), Line: 6},
		{Op: OpFail, Fail: "timeout", Line: 7},
		{Op: OpRead, Data: []byte("trailing space kept "), Line: 9},
	}
	if len(tr.Exchanges) != len(want) {
		t.Fatalf("parsed %d exchanges, want %d: %+v", len(tr.Exchanges), len(want), tr.Exchanges)
	}
	for i, e := range tr.Exchanges {
		w := want[i]
		if e.Op != w.Op || string(e.Data) != string(w.Data) || e.Fail != w.Fail || e.Line != w.Line {
			t.Errorf("exchange %d = %+v, want %+v", i, e, w)
		}
	}
	// Format and Parse are inverses, for any bytes.
	rng := rand.New(rand.NewPCG(1, 2))
	for range 200 {
		msg := make([]byte, rng.IntN(20))
		for i := range msg {
			msg[i] = byte(rng.IntN(256))
		}
		in := &Transcript{Name: "r", Exchanges: []Exchange{{Op: OpWrite, Data: msg}, {Op: OpRead, Data: msg}}}
		out, err := Parse("r", strings.NewReader(string(in.Format())))
		if err != nil {
			t.Fatalf("Parse(Format(%q)): %v", msg, err)
		}
		if len(out.Exchanges) != 2 || string(out.Exchanges[0].Data) != string(msg) || string(out.Exchanges[1].Data) != string(msg) {
			t.Fatalf("round trip of %q gave %+v (text %q)", msg, out.Exchanges, in.Format())
		}
	}
}

func TestParseErrorsNameLine(t *testing.T) {
	for _, tc := range []struct{ text, want string }{
		{"> ok\nfoo\n", "x.txt:2"},
		{">x\n", "want a space"},
		{"! boom\n", "timeout, disconnected"},
		{"> \\q\n", "unknown escape"},
		{"> \\x4\n", "two hex digits"},
		{"> \\xzz\n", "two hex digits"},
		{"> a\\\n", "lone backslash"},
		{" > indented\n", "x.txt:1"},
	} {
		_, err := ParseString("x.txt", tc.text)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("Parse(%q) = %v, want an error containing %q", tc.text, err, tc.want)
		}
	}
}

func TestPlaybackExactBytes(t *testing.T) {
	ctx := t.Context()
	p, err := LoadPlayback("testdata/idn.txt")
	if err != nil {
		t.Fatal(err)
	}
	if err := p.Write(ctx, []byte("*IDN?")); err != nil {
		t.Fatal(err)
	}
	got, err := p.Read(ctx)
	if err != nil || string(got) != "rolloff,SIM-GEN,0001,1.0" {
		t.Fatalf("Read = %q, %v", got, err)
	}
	if err := p.Write(ctx, []byte("SYST:ERR?")); err != nil {
		t.Fatal(err)
	}
	if got, err := p.Read(ctx); err != nil || string(got) != `0,"No error"` {
		t.Fatalf("Read = %q, %v", got, err)
	}
	if err := p.Close(); err != nil {
		t.Fatalf("Close after every exchange was used: %v", err)
	}
	if err := p.Write(ctx, []byte("*IDN?")); !errors.Is(err, driver.ErrClosed) {
		t.Fatalf("Write after Close = %v, want ErrClosed", err)
	}
}

func TestPlaybackMismatch(t *testing.T) {
	ctx := t.Context()
	for _, tc := range []struct {
		wrote     string
		offset    int
		want, got string
	}{
		{"*IDX?", 3, `'N' (0x4e)`, `'X' (0x58)`},
		{"*IDN", 4, `'?' (0x3f)`, "end of message"},
		{"*IDN? ", 5, "end of message", `' ' (0x20)`},
		{"*idn?", 1, `'I' (0x49)`, `'i' (0x69)`},
	} {
		p, err := LoadPlayback("testdata/idn.txt")
		if err != nil {
			t.Fatal(err)
		}
		err = p.Write(ctx, []byte(tc.wrote))
		var me *MismatchError
		if !errors.As(err, &me) || !errors.Is(err, ErrMismatch) {
			t.Fatalf("Write(%q) = %v, want a MismatchError", tc.wrote, err)
		}
		if me.Offset != tc.offset || me.Line != 3 {
			t.Errorf("Write(%q): offset %d line %d, want offset %d line 3", tc.wrote, me.Offset, me.Line, tc.offset)
		}
		msg := err.Error()
		if !strings.Contains(msg, "want "+tc.want) || !strings.Contains(msg, "got "+tc.got) || !strings.Contains(msg, "idn.txt:3") {
			t.Errorf("Write(%q): message %q should name want %s and got %s at idn.txt:3", tc.wrote, msg, tc.want, tc.got)
		}
		// The failure sticks: later calls and Close report it.
		if _, err := p.Read(ctx); !errors.Is(err, ErrMismatch) {
			t.Errorf("Read after a mismatch = %v", err)
		}
		if err := p.Close(); !errors.As(err, &me) {
			t.Errorf("Close after a mismatch = %v", err)
		}
	}
}

func TestPlaybackOrderAndUnused(t *testing.T) {
	ctx := t.Context()
	p, _ := LoadPlayback("testdata/idn.txt")
	if _, err := p.Read(ctx); !errors.Is(err, ErrMismatch) || !strings.Contains(err.Error(), "idn.txt:3") {
		t.Fatalf("Read where a write is due = %v", err)
	}

	p, _ = LoadPlayback("testdata/idn.txt")
	p.Write(ctx, []byte("*IDN?"))
	if err := p.Write(ctx, []byte("*IDN?")); !errors.Is(err, ErrMismatch) {
		t.Fatalf("Write where a read is due = %v", err)
	}

	p, _ = LoadPlayback("testdata/idn.txt")
	p.Write(ctx, []byte("*IDN?"))
	p.Read(ctx)
	if p.Remaining() != 2 {
		t.Errorf("Remaining = %d, want 2", p.Remaining())
	}
	err := p.Close()
	if !errors.Is(err, ErrUnused) || !strings.Contains(err.Error(), "line 6") || !strings.Contains(err.Error(), "SYST:ERR?") {
		t.Fatalf("Close with exchanges left = %v, want ErrUnused naming line 6", err)
	}

	tr, _ := ParseString("f.txt", "> READ?\n! timeout\n> READ?\n! disconnected\n")
	p = NewPlayback(tr)
	p.Write(ctx, []byte("READ?"))
	if _, err := p.Read(ctx); !errors.Is(err, driver.ErrTimeout) {
		t.Fatalf("recorded time-out = %v", err)
	}
	p.Write(ctx, []byte("READ?"))
	if _, err := p.Read(ctx); !errors.Is(err, driver.ErrDisconnected) {
		t.Fatalf("recorded drop = %v", err)
	}
	if _, err := p.Read(ctx); !errors.Is(err, ErrMismatch) {
		t.Fatalf("Read past the end = %v", err)
	}

	cctx, cancel := context.WithCancel(ctx)
	cancel()
	p = NewPlayback(tr)
	if err := p.Write(cctx, []byte("READ?")); !errors.Is(err, context.Canceled) || p.Remaining() != 4 {
		t.Fatalf("Write with a cancelled context = %v, remaining %d", err, p.Remaining())
	}
}

// TestRecordThenPlayBack records a conversation with a loopback instrument
// through the real TCP transport, then replays it.
func TestRecordThenPlayBack(t *testing.T) {
	addr := scpitest.Listen(t, &scpitest.Instrument{Replies: map[string]string{
		"*IDN?": "rolloff,SIM-GEN,0001,1.0",
		"FREQ?": "+1.000000E+03",
	}})
	ctx := t.Context()
	conn, err := transport.Open(ctx, addr, transport.Opts{Timeout: 200 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	rec := NewRecorder(conn)
	var got []string
	for _, cmd := range []string{"*IDN?", "SOUR:FREQ 1000", "FREQ?", "*CLS"} {
		if err := rec.Write(ctx, []byte(cmd)); err != nil {
			t.Fatal(err)
		}
		if strings.HasSuffix(cmd, "?") {
			resp, err := rec.Read(ctx)
			if err != nil {
				t.Fatal(err)
			}
			got = append(got, string(resp))
		}
	}
	// An unanswered read is recorded as a time-out.
	if _, err := rec.Read(ctx); !errors.Is(err, driver.ErrTimeout) {
		t.Fatalf("Read = %v, want ErrTimeout", err)
	}
	rec.Close()

	text := string(rec.Transcript().Format())
	wantText := "> *IDN?\n< rolloff,SIM-GEN,0001,1.0\n> SOUR:FREQ 1000\n> FREQ?\n< +1.000000E+03\n> *CLS\n! timeout\n"
	if !strings.HasPrefix(text, wantText) {
		t.Fatalf("transcript:\n%s\nwant it to start with:\n%s", text, wantText)
	}
	tr, err := ParseString("recorded", text)
	if err != nil {
		t.Fatal(err)
	}
	p := NewPlayback(tr)
	var replayed []string
	for _, cmd := range []string{"*IDN?", "SOUR:FREQ 1000", "FREQ?", "*CLS"} {
		if err := p.Write(ctx, []byte(cmd)); err != nil {
			t.Fatal(err)
		}
		if strings.HasSuffix(cmd, "?") {
			resp, _ := p.Read(ctx)
			replayed = append(replayed, string(resp))
		}
	}
	if _, err := p.Read(ctx); !errors.Is(err, driver.ErrTimeout) {
		t.Fatalf("replayed time-out = %v", err)
	}
	if err := p.Close(); err != nil {
		t.Fatal(err)
	}
	if strings.Join(got, "|") != strings.Join(replayed, "|") {
		t.Fatalf("replayed %q, recorded %q", replayed, got)
	}
}

package transport

import (
	"errors"
	"strings"
	"testing"
)

func TestParseAddress(t *testing.T) {
	good := []struct {
		in   string
		want Address
		str  string
	}{
		// 5025 is the common raw-socket SCPI port (common practice).
		{"tcp://192.168.1.20", Address{Scheme: "tcp", Host: "192.168.1.20", Port: 5025}, "tcp://192.168.1.20:5025"},
		{"tcp://gen.lab:5555", Address{Scheme: "tcp", Host: "gen.lab", Port: 5555}, "tcp://gen.lab:5555"},
		{"TCP://gen.lab:1/", Address{Scheme: "tcp", Host: "gen.lab", Port: 1}, "tcp://gen.lab:1"},
		{"tcp://[fe80::1%eth0]:5025", Address{Scheme: "tcp", Host: "fe80::1%eth0", Port: 5025}, "tcp://[fe80::1%eth0]:5025"},
		{"tcp://[::1]", Address{Scheme: "tcp", Host: "::1", Port: 5025}, "tcp://[::1]:5025"},
		{"serial:///dev/ttyUSB0", Address{Scheme: "serial", Path: "/dev/ttyUSB0", Serial: DefaultSerialParams}, "serial:///dev/ttyUSB0?baud=9600&bits=8&parity=none&stop=1&flow=none"},
		{"serial:///dev/ttyUSB0?baud=115200&bits=7&parity=even&stop=2&flow=none",
			Address{Scheme: "serial", Path: "/dev/ttyUSB0", Serial: SerialParams{Baud: 115200, DataBits: 7, Parity: "even", StopBits: 2, Flow: "none"}},
			"serial:///dev/ttyUSB0?baud=115200&bits=7&parity=even&stop=2&flow=none"},
		{"serial:///dev/serial/by-id/usb-Bench_Port:1-if00?baud=19200", Address{Scheme: "serial", Path: "/dev/serial/by-id/usb-Bench_Port:1-if00",
			Serial: SerialParams{Baud: 19200, DataBits: 8, Parity: "none", StopBits: 1, Flow: "none"}}, ""},
		{"usbtmc:///dev/usbtmc0", Address{Scheme: "usbtmc", Path: "/dev/usbtmc0"}, "usbtmc:///dev/usbtmc0"},
	}
	for _, tc := range good {
		got, err := ParseAddress(tc.in)
		if err != nil {
			t.Errorf("ParseAddress(%q): %v", tc.in, err)
			continue
		}
		if got != tc.want {
			t.Errorf("ParseAddress(%q) = %+v, want %+v", tc.in, got, tc.want)
		}
		if tc.str != "" && got.String() != tc.str {
			t.Errorf("ParseAddress(%q).String() = %q, want %q", tc.in, got.String(), tc.str)
		}
		// The canonical form parses back to the same address.
		if again, err := ParseAddress(got.String()); err != nil || again != got {
			t.Errorf("ParseAddress(%q) = %+v, %v; want %+v", got.String(), again, err, got)
		}
	}

	bad := []struct {
		in, part, allowed string
	}{
		{"192.168.1.20:5025", "scheme", "tcp://host[:port]"},
		{"gpib://7", "scheme", "tcp, serial, usbtmc"},
		{"tcp://", "host", "host name or IP"},
		{"tcp://:5025", "host", "host name or IP"},
		{"tcp://gen:", "port", "1 to 65535"},
		{"tcp://gen:0", "port", "1 to 65535"},
		{"tcp://gen:65536", "port", "1 to 65535"},
		{"tcp://gen:50x5", "port", "1 to 65535"},
		{"tcp://gen:5025/path", "host", "nothing after it"},
		{"tcp://gen:5025?x=1", "host", "nothing after it"},
		{"tcp://fe80::1", "host", "brackets"},
		{"tcp://[fe80::1", "host", "brackets"},
		{"tcp://ge n", "host", "without spaces"},
		{"serial://dev/ttyUSB0", "path", "three slashes"},
		{"serial://", "path", "absolute device path"},
		{"serial:///dev/ttyUSB0?baud=fast", "baud", "50 to 4000000"},
		{"serial:///dev/ttyUSB0?baud=10", "baud", "50 to 4000000"},
		{"serial:///dev/ttyUSB0?bits=9", "bits", "5, 6, 7, 8"},
		{"serial:///dev/ttyUSB0?parity=N", "parity", "none, odd, even, mark, space"},
		{"serial:///dev/ttyUSB0?stop=1.5", "stop", "1, 2"},
		{"serial:///dev/ttyUSB0?flow=rtscts", "flow", "none"},
		{"serial:///dev/ttyUSB0?speed=9600", "query parameter", "baud, bits, parity, stop, flow"},
		{"serial:///dev/ttyUSB0?baud=9600&baud=19200", "baud", "one value"},
		{"serial:///dev/ttyUSB0?baud=%zz", "query", "name=value"},
		{"usbtmc://dev/usbtmc0", "path", "three slashes"},
		{"usbtmc:///dev/usbtmc0?x=1", "path", "without a query"},
	}
	for _, tc := range bad {
		got, err := ParseAddress(tc.in)
		var ae *AddressError
		if !errors.As(err, &ae) {
			t.Errorf("ParseAddress(%q) = %+v, %v; want an *AddressError", tc.in, got, err)
			continue
		}
		if ae.Part != tc.part {
			t.Errorf("ParseAddress(%q): part %q, want %q (%v)", tc.in, ae.Part, tc.part, err)
		}
		msg := err.Error()
		if !strings.Contains(msg, tc.allowed) || !strings.Contains(msg, tc.in) {
			t.Errorf("ParseAddress(%q): message %q should quote the address and say %q", tc.in, msg, tc.allowed)
		}
		if ae.Value != "" && !strings.Contains(msg, ae.Value) {
			t.Errorf("ParseAddress(%q): message %q should name the bad value %q", tc.in, msg, ae.Value)
		}
	}
}

func TestOptsDefaultsAndValidate(t *testing.T) {
	o := Opts{}.WithDefaults()
	// IEEE 488.2 §7.5: NL terminates a program message.
	if o.WriteTerm != "\n" || o.ReadTerm != "\n" || o.Timeout != DefaultTimeout || o.MaxRead != DefaultMaxRead {
		t.Errorf("defaults = %+v", o)
	}
	kept := Opts{WriteTerm: "\r\n", ReadTerm: "\r", Timeout: 5, MaxRead: 10}.WithDefaults()
	if kept.WriteTerm != "\r\n" || kept.ReadTerm != "\r" || kept.Timeout != 5 || kept.MaxRead != 10 {
		t.Errorf("WithDefaults changed set fields: %+v", kept)
	}
	for _, bad := range []Opts{{Timeout: -1}, {MaxRead: -1}, {WriteTerm: "\r\n\r\n\r"}, {ReadTerm: "xxxxx"}, {ReadTerm: ">"}, {WriteTerm: "\t"}, {WriteTerm: "\n;"}} {
		if err := bad.Validate(); err == nil {
			t.Errorf("Validate(%+v) = nil, want an error", bad)
		}
	}
}

func TestOpenRefusesBadAddressWithNilConn(t *testing.T) {
	c, err := Open(t.Context(), "tcp://gen:99999", Opts{})
	if err == nil || c != nil {
		t.Fatalf("Open = %v, %v; want a nil Conn and an error", c, err)
	}
	c, err = Open(t.Context(), "tcp://127.0.0.1:5025", Opts{Timeout: -1})
	if err == nil || c != nil || !strings.Contains(err.Error(), "Timeout") {
		t.Fatalf("Open with a bad Opts = %v, %v; want a nil Conn and an error naming Timeout", c, err)
	}
}

package transport

import (
	"fmt"
	"net"
	"net/url"
	"sort"
	"strconv"
	"strings"
)

// Transport schemes accepted in an address.
const (
	SchemeTCP    = "tcp"
	SchemeSerial = "serial"
	SchemeUSBTMC = "usbtmc"
)

const allowedForms = "tcp://host[:port], serial:///dev/ttyX[?baud=..&bits=..&parity=..&stop=..&flow=..], usbtmc:///dev/usbtmcN"

// Address is a parsed instrument address.
type Address struct {
	Scheme string       // SchemeTCP, SchemeSerial or SchemeUSBTMC
	Host   string       // tcp: host name or IP literal (without brackets)
	Port   int          // tcp: port, DefaultTCPPort when the address names none
	Path   string       // serial, usbtmc: absolute device path
	Serial SerialParams // serial: line settings
}

// SerialParams are the line settings of a serial address.
type SerialParams struct {
	Baud     int    // bits per second; default 9600
	DataBits int    // 5, 6, 7 or 8; default 8
	Parity   string // "none", "odd", "even", "mark" or "space"; default "none"
	StopBits int    // 1 or 2; default 1
	Flow     string // "none" (the only flow control the serial driver offers); default "none"
}

// DefaultSerialParams are the settings of a serial address without a query:
// 9600 baud, 8 data bits, no parity, 1 stop bit, no flow control (common
// practice for instrument RS-232 ports).
var DefaultSerialParams = SerialParams{Baud: 9600, DataBits: 8, Parity: "none", StopBits: 1, Flow: "none"}

// Limits of the serial baud rate accepted in an address.
const (
	MinBaud = 50
	MaxBaud = 4000000
)

// String returns the address in its canonical form, with every default
// written out.
func (a Address) String() string {
	switch a.Scheme {
	case SchemeTCP:
		return "tcp://" + net.JoinHostPort(a.Host, strconv.Itoa(a.Port))
	case SchemeSerial:
		p := a.Serial
		return fmt.Sprintf("serial://%s?baud=%d&bits=%d&parity=%s&stop=%d&flow=%s", a.Path, p.Baud, p.DataBits, p.Parity, p.StopBits, p.Flow)
	case SchemeUSBTMC:
		return "usbtmc://" + a.Path
	}
	return a.Scheme + "://?"
}

// AddressError is a refused address. Part names the piece that is wrong
// ("scheme", "host", "port", "path", or a serial query parameter), Value is
// what was given and Allowed what would be accepted.
type AddressError struct {
	Address string
	Part    string
	Value   string
	Allowed string
}

// Error names the address, the bad part, its value and what is allowed.
func (e *AddressError) Error() string {
	if e.Value == "" {
		return fmt.Sprintf("transport: address %q: %s missing; allowed: %s", e.Address, e.Part, e.Allowed)
	}
	return fmt.Sprintf("transport: address %q: %s %q not allowed; allowed: %s", e.Address, e.Part, e.Value, e.Allowed)
}

// ParseAddress parses an instrument address:
//
//	tcp://host[:port]                 LAN raw socket, port default 5025
//	serial:///dev/ttyUSB0?baud=115200&bits=8&parity=none&stop=1&flow=none
//	usbtmc:///dev/usbtmc0             Linux USBTMC character device
//
// Errors are *AddressError.
func ParseAddress(s string) (Address, error) {
	bad := func(part, value, allowed string) (Address, error) {
		return Address{}, &AddressError{Address: s, Part: part, Value: value, Allowed: allowed}
	}
	scheme, rest, ok := strings.Cut(s, "://")
	if !ok {
		return bad("scheme", "", allowedForms)
	}
	switch strings.ToLower(scheme) {
	case SchemeTCP:
		return parseTCP(s, rest, bad)
	case SchemeSerial:
		return parseSerial(s, rest, bad)
	case SchemeUSBTMC:
		path, err := parseDevicePath(rest, "usbtmc:///dev/usbtmc0", bad)
		if err != nil {
			return Address{}, err
		}
		if strings.ContainsAny(path, "?#") {
			return bad("path", path, "an absolute device path without a query, e.g. usbtmc:///dev/usbtmc0")
		}
		return Address{Scheme: SchemeUSBTMC, Path: path}, nil
	}
	return bad("scheme", scheme, "tcp, serial, usbtmc ("+allowedForms+")")
}

type badFunc func(part, value, allowed string) (Address, error)

func parseTCP(s, rest string, bad badFunc) (Address, error) {
	hostport := strings.TrimSuffix(rest, "/")
	if i := strings.IndexAny(hostport, "/?#@"); i >= 0 {
		return bad("host", hostport, "host[:port] with nothing after it, e.g. tcp://192.168.1.20:5025")
	}
	host, portText := hostport, ""
	if strings.HasPrefix(hostport, "[") {
		end := strings.Index(hostport, "]")
		if end < 0 {
			return bad("host", hostport, "an IPv6 literal in brackets, e.g. tcp://[fe80::1]:5025")
		}
		host = hostport[1:end]
		after := hostport[end+1:]
		if after != "" {
			if !strings.HasPrefix(after, ":") {
				return bad("host", hostport, "[IPv6]:port")
			}
			portText = after[1:]
			if portText == "" {
				return bad("port", "", "1 to 65535 after the colon, or no colon for 5025")
			}
		}
	} else if i := strings.LastIndex(hostport, ":"); i >= 0 {
		if strings.Count(hostport, ":") > 1 {
			return bad("host", hostport, "an IPv6 literal in brackets, e.g. tcp://[fe80::1]:5025")
		}
		host, portText = hostport[:i], hostport[i+1:]
		if portText == "" {
			return bad("port", "", "1 to 65535 after the colon, or no colon for 5025")
		}
	}
	if host == "" {
		return bad("host", "", "a host name or IP address, e.g. tcp://192.168.1.20:5025")
	}
	for _, r := range host {
		if r <= ' ' || r == 0x7f {
			return bad("host", host, "a host name or IP address without spaces or control characters")
		}
	}
	port := DefaultTCPPort
	if portText != "" {
		p, err := strconv.Atoi(portText)
		if err != nil || p < 1 || p > 65535 || strings.HasPrefix(portText, "+") {
			return bad("port", portText, "an integer from 1 to 65535 (default 5025)")
		}
		port = p
	}
	return Address{Scheme: SchemeTCP, Host: host, Port: port}, nil
}

func parseDevicePath(rest, example string, bad badFunc) (string, error) {
	if rest == "" {
		_, err := bad("path", "", "an absolute device path, e.g. "+example)
		return "", err
	}
	if !strings.HasPrefix(rest, "/") {
		_, err := bad("path", rest, "an absolute device path after three slashes (empty host), e.g. "+example)
		return "", err
	}
	for _, r := range rest {
		if r < ' ' || r == 0x7f {
			_, err := bad("path", rest, "a device path without control characters")
			return "", err
		}
	}
	return rest, nil
}

func parseSerial(s, rest string, bad badFunc) (Address, error) {
	pathPart, query, _ := strings.Cut(rest, "?")
	path, err := parseDevicePath(pathPart, "serial:///dev/ttyUSB0?baud=115200", bad)
	if err != nil {
		return Address{}, err
	}
	if strings.Contains(path, "#") {
		return bad("path", path, "a device path without '#'")
	}
	p := DefaultSerialParams
	values, err := url.ParseQuery(query)
	if err != nil {
		return bad("query", query, "name=value pairs joined by '&'")
	}
	known := map[string]bool{"baud": true, "bits": true, "parity": true, "stop": true, "flow": true}
	names := make([]string, 0, len(values))
	for name := range values {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		vs := values[name]
		if !known[name] {
			return bad("query parameter", name, "baud, bits, parity, stop, flow")
		}
		if len(vs) != 1 {
			return bad(name, strings.Join(vs, ","), "one value ("+name+" given "+strconv.Itoa(len(vs))+" times)")
		}
		v := vs[0]
		switch name {
		case "baud":
			n, err := strconv.Atoi(v)
			if err != nil || n < MinBaud || n > MaxBaud {
				return bad("baud", v, fmt.Sprintf("an integer from %d to %d bits per second", MinBaud, MaxBaud))
			}
			p.Baud = n
		case "bits":
			n, err := strconv.Atoi(v)
			if err != nil || n < 5 || n > 8 {
				return bad("bits", v, "5, 6, 7, 8")
			}
			p.DataBits = n
		case "parity":
			switch v {
			case "none", "odd", "even", "mark", "space":
				p.Parity = v
			default:
				return bad("parity", v, "none, odd, even, mark, space")
			}
		case "stop":
			switch v {
			case "1":
				p.StopBits = 1
			case "2":
				p.StopBits = 2
			default:
				return bad("stop", v, "1, 2")
			}
		case "flow":
			if v != "none" {
				return bad("flow", v, "none (the serial driver cannot switch hardware or XON/XOFF flow control)")
			}
			p.Flow = v
		}
	}
	return Address{Scheme: SchemeSerial, Path: path, Serial: p}, nil
}

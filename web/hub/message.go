package hub

import (
	"bytes"
	"encoding/json"
	"fmt"
	"strconv"
	"unicode/utf8"
)

// Client message types.
const (
	TypePing   = "ping"   // the server answers {"type":"pong"}
	TypeReplay = "replay" // resend the stored points from from_seq on
)

// MaxSeq is the largest from_seq a client may ask for.
const MaxSeq = 1 << 30

// ClientMessage is a message from a browser to the daemon.
type ClientMessage struct {
	Type    string `json:"type"`
	FromSeq int    `json:"from_seq,omitempty"`
}

// MessageError is a client message refused by DecodeClientMessage.
type MessageError struct {
	Field   string // "" for the message as a whole
	Value   string // the offending value, quoted and shortened
	Allowed string
}

func (e *MessageError) Error() string {
	if e.Field == "" {
		return fmt.Sprintf("live message: %s (want %s)", e.Value, e.Allowed)
	}
	return fmt.Sprintf("live message: field %q: %s (want %s)", e.Field, e.Value, e.Allowed)
}

func short(b []byte) string {
	if len(b) > 40 {
		b = append(b[:40:40], "..."...)
	}
	return strconv.Quote(string(b))
}

// DecodeClientMessage parses one client message strictly: a single JSON
// object of at most DefaultMaxMessageBytes bytes, valid UTF-8, with a
// known "type", only the fields that type allows, each once, with values
// of the right type and range, and nothing after it.
func DecodeClientMessage(data []byte) (ClientMessage, error) {
	var m ClientMessage
	if len(data) > DefaultMaxMessageBytes {
		return m, &MessageError{Value: fmt.Sprintf("%d bytes", len(data)), Allowed: fmt.Sprintf("at most %d bytes", DefaultMaxMessageBytes)}
	}
	if !utf8.Valid(data) {
		return m, &MessageError{Value: "invalid UTF-8", Allowed: "UTF-8 JSON text"}
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.UseNumber()
	tok, err := dec.Token()
	if err != nil || tok != json.Delim('{') {
		return m, &MessageError{Value: short(data), Allowed: "a JSON object"}
	}
	seen := map[string]bool{}
	var haveSeq bool
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return m, &MessageError{Value: short(data), Allowed: "a JSON object"}
		}
		key, _ := tok.(string)
		if seen[key] {
			return m, &MessageError{Field: key, Value: "given twice", Allowed: "each field once"}
		}
		seen[key] = true
		val, err := dec.Token()
		if err != nil {
			return m, &MessageError{Field: key, Value: short(data), Allowed: "a JSON value"}
		}
		switch key {
		case "type":
			s, ok := val.(string)
			if !ok {
				return m, &MessageError{Field: key, Value: fmt.Sprintf("%v", val), Allowed: "a string"}
			}
			m.Type = s
		case "from_seq":
			n, ok := val.(json.Number)
			if !ok {
				return m, &MessageError{Field: key, Value: fmt.Sprintf("%v", val), Allowed: "an integer"}
			}
			i, err := strconv.ParseInt(n.String(), 10, 64)
			if err != nil || i < 0 || i > MaxSeq {
				return m, &MessageError{Field: key, Value: n.String(), Allowed: fmt.Sprintf("an integer 0..%d", MaxSeq)}
			}
			m.FromSeq, haveSeq = int(i), true
		default:
			return m, &MessageError{Field: key, Value: "unknown field", Allowed: "type, from_seq"}
		}
	}
	if tok, err := dec.Token(); err != nil || tok != json.Delim('}') {
		return m, &MessageError{Value: short(data), Allowed: "a JSON object"}
	}
	if rest := bytes.TrimSpace(data[dec.InputOffset():]); len(rest) > 0 {
		return m, &MessageError{Value: "data after the object", Allowed: "a single JSON object"}
	}
	switch m.Type {
	case TypePing:
		if haveSeq {
			return m, &MessageError{Field: "from_seq", Value: "given with ping", Allowed: "only with replay"}
		}
	case TypeReplay:
		if !haveSeq {
			return m, &MessageError{Field: "from_seq", Value: "missing", Allowed: "an integer 0.." + strconv.Itoa(MaxSeq)}
		}
	case "":
		return m, &MessageError{Field: "type", Value: "missing", Allowed: "ping or replay"}
	default:
		return m, &MessageError{Field: "type", Value: strconv.Quote(m.Type), Allowed: "ping or replay"}
	}
	return m, nil
}

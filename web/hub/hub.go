// Package hub fans a run's live timeline out to websocket clients: one
// reader and one writer goroutine per connection, a bounded send queue per
// client, and a client that cannot keep up is dropped rather than waited
// for, so that a slow browser never slows the sweep.
package hub

import (
	"context"
	"errors"
	"net"
	"sync"
	"time"

	"github.com/gorilla/websocket"
	"github.com/rs/zerolog"
)

// Defaults for Options.
const (
	DefaultSendQueue       = 512
	DefaultWriteWait       = 10 * time.Second
	DefaultPongWait        = 60 * time.Second
	DefaultMaxMessageBytes = 1024
)

// Options tune a Hub. Zero fields take the defaults above.
type Options struct {
	// SendQueue is the number of messages a client may have pending before
	// it is dropped.
	SendQueue int
	// WriteWait bounds every write to a client.
	WriteWait time.Duration
	// PongWait is how long a client may stay silent (no pong, no message)
	// before its connection is closed.
	PongWait time.Duration
	// PingPeriod is how often the server pings; it must be below PongWait
	// (default 9/10 of it).
	PingPeriod time.Duration
	// MaxMessageBytes is the read limit on incoming messages.
	MaxMessageBytes int64
	Log             zerolog.Logger
}

func (o *Options) fill() {
	if o.SendQueue <= 0 {
		o.SendQueue = DefaultSendQueue
	}
	if o.WriteWait <= 0 {
		o.WriteWait = DefaultWriteWait
	}
	if o.PongWait <= 0 {
		o.PongWait = DefaultPongWait
	}
	if o.PingPeriod <= 0 || o.PingPeriod >= o.PongWait {
		o.PingPeriod = o.PongWait * 9 / 10
	}
	if o.MaxMessageBytes <= 0 {
		o.MaxMessageBytes = DefaultMaxMessageBytes
	}
}

// NoSeq marks a message that is not a stored point.
const NoSeq = -1

// Message is one text message for the clients of a topic. Seq is the
// point's sequence number for a point message (used to drop the live copy
// of a point the client already received in its replay), NoSeq otherwise.
type Message struct {
	Data []byte
	Seq  int

	prepared *websocket.PreparedMessage
}

// NewMessage returns a message carrying data; seq is NoSeq unless data is a
// stored point.
func NewMessage(data []byte, seq int) Message {
	return Message{Data: data, Seq: seq}
}

// ReplayFunc sends a new client what its topic has so far, through send,
// starting at point fromSeq. It returns the highest point seq it sent (or
// fromSeq-1 when none), so that live copies of those points are skipped.
// It runs on the client's writer goroutine.
type ReplayFunc func(ctx context.Context, fromSeq int, send func(Message) error) (lastSeq int, err error)

// ErrClosed is returned by Attach after Close.
var ErrClosed = errors.New("hub: closed")

// Hub holds the connected clients by topic (a run id).
type Hub struct {
	opts Options

	mu     sync.Mutex
	topics map[string]map[*Client]struct{}
	closed bool
	wg     sync.WaitGroup

	dropped int64 // clients dropped for being too slow, under mu
}

// New returns an empty hub.
func New(opts Options) *Hub {
	opts.fill()
	return &Hub{opts: opts, topics: make(map[string]map[*Client]struct{})}
}

// Options returns the hub's effective options.
func (h *Hub) Options() Options { return h.opts }

// close reasons, written in the close frame.
const (
	reasonTooSlow  = "client too slow"
	reasonShutdown = "daemon shutting down"
	reasonBadInput = "bad message"
)

// Client is one websocket connection subscribed to a topic.
type Client struct {
	hub   *Hub
	conn  *websocket.Conn
	topic string
	send  chan Message
	// replays carries replay requests from the reader to the writer.
	replays chan int
	done    chan struct{} // closed when the reader stops
	replay  ReplayFunc
	handle  func(*Client, ClientMessage)

	// under hub.mu
	closeCode   int
	closeReason string
	sendClosed  bool
}

// Topic returns the topic the client follows.
func (c *Client) Topic() string { return c.topic }

// Attach subscribes conn to topic and starts its reader and writer. The
// client is registered before replay runs, so no event published after
// Attach is missed; replay's points are deduplicated by seq. handle, if
// not nil, receives each valid client message other than ping and replay
// (which the hub answers itself).
func (h *Hub) Attach(conn *websocket.Conn, topic string, replay ReplayFunc, handle func(*Client, ClientMessage)) (*Client, error) {
	c := &Client{
		hub: h, conn: conn, topic: topic,
		send:    make(chan Message, h.opts.SendQueue),
		replays: make(chan int, 4),
		done:    make(chan struct{}),
		replay:  replay,
		handle:  handle,
	}
	h.mu.Lock()
	if h.closed {
		h.mu.Unlock()
		return nil, ErrClosed
	}
	set := h.topics[topic]
	if set == nil {
		set = make(map[*Client]struct{})
		h.topics[topic] = set
	}
	set[c] = struct{}{}
	h.wg.Add(2)
	h.mu.Unlock()
	go c.writePump()
	go c.readPump()
	return c, nil
}

// Clients returns the number of clients following topic.
func (h *Hub) Clients(topic string) int {
	h.mu.Lock()
	defer h.mu.Unlock()
	return len(h.topics[topic])
}

// Dropped returns how many clients were dropped for not keeping up.
func (h *Hub) Dropped() int64 {
	h.mu.Lock()
	defer h.mu.Unlock()
	return h.dropped
}

// prepare builds the shared frame once for all clients.
func prepare(m Message) Message {
	if m.prepared == nil {
		if pm, err := websocket.NewPreparedMessage(websocket.TextMessage, m.Data); err == nil {
			m.prepared = pm
		}
	}
	return m
}

// Publish queues m for every client of topic without blocking: a client
// whose queue is full is dropped.
func (h *Hub) Publish(topic string, m Message) {
	h.mu.Lock()
	defer h.mu.Unlock()
	set := h.topics[topic]
	if len(set) == 0 {
		return
	}
	m = prepare(m)
	for c := range set {
		select {
		case c.send <- m:
		default:
			h.opts.Log.Warn().Str("topic", topic).Msg("live client dropped: too slow")
			h.dropLocked(c)
		}
	}
}

// sendTo queues m for one client without blocking (a reply to its own
// request); a full queue drops the client.
func (h *Hub) sendTo(c *Client, m Message) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if c.sendClosed {
		return
	}
	select {
	case c.send <- prepare(m):
	default:
		h.dropLocked(c)
	}
}

// removeLocked unsubscribes c and closes its queue; the writer then sends
// the close frame. h.mu must be held.
func (h *Hub) removeLocked(c *Client, code int, reason string) {
	if set := h.topics[c.topic]; set != nil {
		delete(set, c)
		if len(set) == 0 {
			delete(h.topics, c.topic)
		}
	}
	if !c.sendClosed {
		c.sendClosed = true
		c.closeCode, c.closeReason = code, reason
		close(c.send)
	}
}

func (h *Hub) remove(c *Client, code int, reason string) {
	h.mu.Lock()
	h.removeLocked(c, code, reason)
	h.mu.Unlock()
}

// writeFailed handles a failed write to c: one that ran out of WriteWait
// is a client that does not keep up, dropped and counted as such (unless
// a full queue has dropped it already); any other is a connection gone.
func (h *Hub) writeFailed(c *Client, err error) {
	var ne net.Error
	if !errors.As(err, &ne) || !ne.Timeout() {
		return
	}
	h.mu.Lock()
	defer h.mu.Unlock()
	if c.sendClosed {
		return
	}
	h.opts.Log.Warn().Str("topic", c.topic).Msg("live client dropped: too slow")
	h.dropLocked(c)
}

// dropLocked counts c as too slow and removes it. h.mu must be held.
func (h *Hub) dropLocked(c *Client) {
	h.dropped++
	h.removeLocked(c, websocket.CloseTryAgainLater, reasonTooSlow)
}

// Close tells every client final (when its Data is not empty), sends a
// close frame and waits, until ctx is done, for all connections to end.
// Later Attach calls fail with ErrClosed.
func (h *Hub) Close(ctx context.Context, final Message) error {
	h.mu.Lock()
	h.closed = true
	final = prepare(final)
	for _, set := range h.topics {
		for c := range set {
			if len(final.Data) > 0 {
				select {
				case c.send <- final:
				default:
				}
			}
			h.removeLocked(c, websocket.CloseGoingAway, reasonShutdown)
		}
	}
	h.mu.Unlock()
	done := make(chan struct{})
	go func() { h.wg.Wait(); close(done) }()
	select {
	case <-done:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

func (c *Client) write(m Message) error {
	if err := c.conn.SetWriteDeadline(time.Now().Add(c.hub.opts.WriteWait)); err != nil {
		return err
	}
	if m.prepared != nil {
		return c.conn.WritePreparedMessage(m.prepared)
	}
	return c.conn.WriteMessage(websocket.TextMessage, m.Data)
}

// writePump owns every write to the connection.
func (c *Client) writePump() {
	h := c.hub
	ticker := time.NewTicker(h.opts.PingPeriod)
	ctx, cancel := context.WithCancel(context.Background())
	defer func() {
		cancel()
		ticker.Stop()
		h.remove(c, websocket.CloseNormalClosure, "")
		c.conn.Close()
		h.wg.Done()
	}()
	go func() {
		select {
		case <-c.done:
			cancel()
		case <-ctx.Done():
		}
	}()
	last := NoSeq
	doReplay := func(from int) bool {
		if c.replay == nil {
			return true
		}
		n, err := c.replay(ctx, from, c.write)
		if err != nil {
			h.opts.Log.Debug().Err(err).Str("topic", c.topic).Msg("live replay failed")
			return false
		}
		if n > last {
			last = n
		}
		return true
	}
	if !doReplay(0) {
		return
	}
	for {
		select {
		case m, ok := <-c.send:
			if !ok {
				h.mu.Lock()
				code, reason := c.closeCode, c.closeReason
				h.mu.Unlock()
				_ = c.conn.WriteControl(websocket.CloseMessage,
					websocket.FormatCloseMessage(code, reason), time.Now().Add(h.opts.WriteWait))
				return
			}
			if m.Seq >= 0 {
				if m.Seq <= last {
					continue // already sent in the replay
				}
				last = m.Seq
			}
			if err := c.write(m); err != nil {
				h.writeFailed(c, err)
				return
			}
		case from := <-c.replays:
			if !doReplay(from) {
				return
			}
		case <-ticker.C:
			if err := c.conn.WriteControl(websocket.PingMessage, nil, time.Now().Add(h.opts.WriteWait)); err != nil {
				h.writeFailed(c, err)
				return
			}
		case <-c.done:
			return
		}
	}
}

// readPump owns every read from the connection.
func (c *Client) readPump() {
	h := c.hub
	defer func() {
		close(c.done)
		h.wg.Done()
	}()
	c.conn.SetReadLimit(h.opts.MaxMessageBytes)
	_ = c.conn.SetReadDeadline(time.Now().Add(h.opts.PongWait))
	c.conn.SetPongHandler(func(string) error {
		return c.conn.SetReadDeadline(time.Now().Add(h.opts.PongWait))
	})
	for {
		_, data, err := c.conn.ReadMessage()
		if err != nil {
			if websocket.IsUnexpectedCloseError(err, websocket.CloseGoingAway, websocket.CloseNormalClosure, websocket.CloseNoStatusReceived) {
				h.opts.Log.Debug().Err(err).Str("topic", c.topic).Msg("live client read")
			}
			if errors.Is(err, websocket.ErrReadLimit) {
				h.remove(c, websocket.CloseMessageTooBig, "message too big")
			}
			return
		}
		_ = c.conn.SetReadDeadline(time.Now().Add(h.opts.PongWait))
		m, err := DecodeClientMessage(data)
		if err != nil {
			h.opts.Log.Debug().Err(err).Str("topic", c.topic).Msg("live client sent a bad message")
			h.remove(c, websocket.ClosePolicyViolation, reasonBadInput)
			// Keep reading until the writer closes the connection, so
			// that the close frame can be read by the peer.
			continue
		}
		switch m.Type {
		case TypePing:
			h.sendTo(c, NewMessage(pongMessage(), NoSeq))
		case TypeReplay:
			select {
			case c.replays <- m.FromSeq:
			default: // a burst of replay requests: the pending ones suffice
			}
		default:
			if c.handle != nil {
				c.handle(c, m)
			}
		}
	}
}

func pongMessage() []byte {
	return []byte(`{"type":"pong","time":"` + time.Now().UTC().Format(time.RFC3339Nano) + `"}`)
}

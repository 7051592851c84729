package publish

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"sync"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"
	"github.com/rs/zerolog"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
	"rolloff/sweep/store"
)

// Config configures a Publisher.
type Config struct {
	Broker Broker
	// BenchID names the bench in the topics (see CheckBenchID).
	BenchID string
	// StoreDir is the run store directory whose runs are published.
	StoreDir string
	// Run, when set, restricts publishing to that one run (the CLI's
	// run and demo); otherwise every run that appears in the store is
	// published, and the Recent newest runs already there.
	Run string
	// Recent is how many runs already in the store when the publisher
	// starts have their state and result published (default 5; their
	// points only when they have not ended). Negative: none of them,
	// only runs that appear later.
	Recent int
	// KeepBlocks is how many of the newest ended runs keep their
	// points retained in the broker as blocks (default 5); older ones
	// are cleared, so that the broker's memory does not grow with the
	// store. Their state and result stay.
	KeepBlocks int
	// Poll is how often the store is looked at (default 100 ms); Notify
	// makes the publisher look at once.
	Poll time.Duration
	// Window is the most point messages awaiting the broker's
	// acknowledgement (default 256).
	Window int
	// Replay is how far back, before a lost connection, points the
	// broker had acknowledged are sent again after the reconnect
	// (default 5 s): a broker that dies may not have passed them on.
	Replay time.Duration
	// Version is the build's version, in the status.
	Version string
	Log     zerolog.Logger
}

// Publisher publishes one bench's runs. Create it with Start.
type Publisher struct {
	cfg    Config
	client mqtt.Client
	kick   chan struct{}
	ackq   chan ackItem
	stop   chan struct{}
	loopWG sync.WaitGroup

	mu        sync.Mutex
	epoch     int
	epochCh   chan struct{} // closed when epoch changes
	connected bool
	lostAt    time.Time
	inflight  int
	runs      map[string]*runPub
	retained  map[string]*retainedMsg // by topic
	stopping  bool

	rounds int // looks at the store and sends completed

	// Owned by the loop goroutine.
	dirMod, dirListed time.Time
}

// runPub is what the publisher knows of one run.
type runPub struct {
	id      string
	points  bool // publish its points
	metaMod time.Time
	meta    store.Meta
	offset  int64 // bytes of points.jsonl read
	pts     []point.Point
	ackedAt []time.Time
	acked   int // points 0..acked-1 acknowledged
	next    int // next point to send
	result  bool
	skip    bool // an old run not published
	blocks  int  // full blocks set
	partLen int  // points in the last partial block set
	partAt  time.Time
	// quietScans counts the looks at the run since it ended; after
	// quietAfter of them it is not looked at again (an ended run does
	// not change; the wait is for a late result.json).
	quietScans int
	// The state last set: its state and message, point count, time.
	stateKey string
	stateN   int
	stateAt  time.Time
	count    int // points stored, for a run whose points are not read
	// listedUpdated is meta.json's time when the run was found
	// interrupted at the start.
	listedUpdated time.Time
}

// retainedMsg is the current payload of a retained topic.
type retainedMsg struct {
	payload []byte
	sent    bool // handed to the client in this epoch
	acked   bool
}

type ackItem struct {
	epoch int
	tok   mqtt.Token
	run   *runPub // nil for a retained message
	index int
	ret   *retainedMsg
}

// ErrNotFlushed is returned by Flush when the broker has not
// acknowledged everything before the context ended.
var ErrNotFlushed = errors.New("publish: not everything acknowledged by the broker")

// Start checks cfg and starts publishing in the background. The broker
// need not be reachable: the publisher connects and reconnects on its
// own and catches up.
func Start(cfg Config) (*Publisher, error) {
	if err := CheckBenchID(cfg.BenchID); err != nil {
		return nil, fmt.Errorf("--bench-id: %w", err)
	}
	if cfg.StoreDir == "" {
		return nil, errors.New("publish: no store directory")
	}
	if cfg.Recent == 0 {
		cfg.Recent = 5
	}
	if cfg.KeepBlocks <= 0 {
		cfg.KeepBlocks = 5
	}
	if cfg.Poll <= 0 {
		cfg.Poll = 100 * time.Millisecond
	}
	if cfg.Window <= 0 {
		cfg.Window = 256
	}
	if cfg.Replay == 0 {
		cfg.Replay = 5 * time.Second
	}
	ka := cfg.Broker.KeepAlive
	if ka <= 0 {
		ka = DefaultKeepAlive
	}
	opts, err := cfg.Broker.ClientOptions("rolloff-bench-" + cfg.BenchID)
	if err != nil {
		return nil, err
	}
	p := &Publisher{
		cfg: cfg, kick: make(chan struct{}, 1), ackq: make(chan ackItem, cfg.Window+64),
		stop: make(chan struct{}), epochCh: make(chan struct{}),
		runs: map[string]*runPub{}, retained: map[string]*retainedMsg{},
	}
	will, _ := json.Marshal(Status{Schema: Schema, Bench: cfg.BenchID, Reason: "connection lost", KeepAliveS: ka.Seconds()})
	opts.SetBinaryWill(StatusTopic(cfg.BenchID), will, 1, true)
	opts.SetOnConnectHandler(func(mqtt.Client) { p.connUp() })
	opts.SetConnectionLostHandler(func(_ mqtt.Client, err error) { p.connDown(err) })
	opts.SetOrderMatters(false)
	p.client = mqtt.NewClient(opts)
	p.client.Connect() // retries in the background (ConnectRetry)
	p.scanStart()
	p.loopWG.Add(2)
	go p.loop()
	go p.acker()
	return p, nil
}

// Notify makes the publisher look at the store now (after a point was
// stored, say) rather than at its next poll. It never blocks.
func (p *Publisher) Notify() {
	select {
	case p.kick <- struct{}{}:
	default:
	}
}

// Acked returns how many points of run the broker has acknowledged.
func (p *Publisher) Acked(run string) int {
	p.mu.Lock()
	defer p.mu.Unlock()
	if r := p.runs[run]; r != nil {
		return r.acked
	}
	return 0
}

// Connected reports whether the publisher is connected to the broker.
func (p *Publisher) Connected() bool {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.connected
}

// Flush waits until the broker has acknowledged every point and
// retained message known so far, or ctx ends (ErrNotFlushed).
func (p *Publisher) Flush(ctx context.Context) error {
	t := time.NewTicker(20 * time.Millisecond)
	defer t.Stop()
	p.mu.Lock()
	from := p.rounds
	p.mu.Unlock()
	for {
		p.Notify()
		p.mu.Lock()
		// A round that began after this call has seen the store as it
		// is now.
		looked := p.rounds >= from+2
		p.mu.Unlock()
		if looked && p.flushed() {
			return nil
		}
		select {
		case <-ctx.Done():
			return fmt.Errorf("%w: %w", ErrNotFlushed, ctx.Err())
		case <-t.C:
		}
	}
}

func (p *Publisher) flushed() bool {
	p.mu.Lock()
	defer p.mu.Unlock()
	for _, r := range p.runs {
		if r.points && r.acked < len(r.pts) {
			return false
		}
	}
	for _, m := range p.retained {
		if !m.acked {
			return false
		}
	}
	return true
}

// Stop flushes what it can before ctx ends, publishes the offline
// status and disconnects. Later calls do nothing. Stop and Flush are
// for one goroutine.
func (p *Publisher) Stop(ctx context.Context) error {
	p.mu.Lock()
	stopped := p.stopping
	p.mu.Unlock()
	if stopped {
		return nil // stopped before
	}
	ferr := p.Flush(ctx)
	p.mu.Lock()
	p.stopping = true
	p.mu.Unlock()
	close(p.stop)
	p.loopWG.Wait()
	if p.client.IsConnectionOpen() {
		st, _ := json.Marshal(Status{Schema: Schema, Bench: p.cfg.BenchID, Reason: "stopped", Version: p.cfg.Version, Time: time.Now().UTC()})
		tok := p.client.Publish(StatusTopic(p.cfg.BenchID), 1, true, st)
		wait := 2 * time.Second
		if d, ok := ctx.Deadline(); ok {
			wait = max(min(wait, time.Until(d)), 100*time.Millisecond)
		}
		tok.WaitTimeout(wait)
	}
	p.client.Disconnect(250)
	return ferr
}

// bumpLocked starts a new epoch: whatever was sent is to be sent again
// from the last acknowledged point. The caller holds mu.
func (p *Publisher) bumpLocked() {
	p.epoch++
	close(p.epochCh)
	p.epochCh = make(chan struct{})
	for _, r := range p.runs {
		r.next = r.acked
	}
	for _, m := range p.retained {
		m.sent, m.acked = false, false
	}
}

func (p *Publisher) connUp() {
	p.mu.Lock()
	p.bumpLocked()
	p.connected = true
	if !p.lostAt.IsZero() {
		// Send again what was acknowledged shortly before the loss.
		from := p.lostAt.Add(-p.cfg.Replay)
		for _, r := range p.runs {
			i := r.acked
			for i > 0 && r.ackedAt[i-1].After(from) {
				i--
			}
			r.next = i
		}
	}
	p.mu.Unlock()
	p.cfg.Log.Info().Str("broker", p.cfg.Broker.URL).Msg("connected to the broker")
	p.Notify()
}

func (p *Publisher) connDown(err error) {
	p.mu.Lock()
	p.bumpLocked()
	p.connected = false
	p.lostAt = time.Now()
	p.mu.Unlock()
	p.cfg.Log.Warn().Err(err).Str("broker", p.cfg.Broker.URL).Msg("broker connection lost; points are kept and sent after the reconnect")
}

func (p *Publisher) loop() {
	defer p.loopWG.Done()
	t := time.NewTicker(p.cfg.Poll)
	defer t.Stop()
	for {
		p.scan()
		p.send()
		p.mu.Lock()
		p.rounds++
		p.mu.Unlock()
		select {
		case <-p.stop:
			return
		case <-t.C:
		case <-p.kick:
		}
	}
}

// acker waits for the broker's acknowledgements in the order the
// messages were handed over.
func (p *Publisher) acker() {
	defer p.loopWG.Done()
	for {
		var it ackItem
		select {
		case <-p.stop:
			return
		case it = <-p.ackq:
		}
		p.mu.Lock()
		stale, epochCh := it.epoch != p.epoch, p.epochCh
		p.mu.Unlock()
		ok := false
		if !stale {
			timer := time.NewTimer(15 * time.Second)
			select {
			case <-it.tok.Done():
				ok = it.tok.Error() == nil
			case <-epochCh:
				stale = true
			case <-timer.C:
			case <-p.stop:
				timer.Stop()
				return
			}
			timer.Stop()
		}
		p.mu.Lock()
		p.inflight--
		switch {
		case stale || it.epoch != p.epoch:
		case !ok:
			p.cfg.Log.Warn().Err(it.tok.Error()).Msg("broker did not acknowledge a message; sending again")
			p.bumpLocked()
		case it.run != nil:
			if it.index == it.run.acked && it.index < len(it.run.ackedAt) { // not a run whose points were since forgotten
				it.run.acked++
				it.run.ackedAt[it.index] = time.Now()
			}
		default:
			it.ret.acked = true
		}
		p.mu.Unlock()
		if !ok && !stale {
			p.Notify()
		}
	}
}

// send hands the client what is due: points up to the window first
// (a block never reaches a receiver before the live copies of its
// points), then the retained messages.
func (p *Publisher) send() {
	p.mu.Lock()
	defer p.mu.Unlock()
	if !p.connected || p.stopping {
		return
	}
	for _, r := range p.sortedRuns() {
		for r.points && r.next < len(r.pts) && p.inflight < p.cfg.Window {
			pt := r.pts[r.next]
			b, err := json.Marshal(Point{Schema: Schema, Bench: p.cfg.BenchID, Run: r.id, Seq: pt.Seq, Point: pt, Sent: time.Now().UTC()})
			if err != nil {
				p.cfg.Log.Error().Err(err).Str("run", r.id).Int("seq", pt.Seq).Msg("point not encodable; skipped")
				r.acked, r.next = r.acked+1, r.next+1
				continue
			}
			p.handOver(ackItem{tok: p.client.Publish(RunTopic(p.cfg.BenchID, r.id, TopicPoints), 1, false, b), run: r, index: r.next})
			r.next++
		}
	}
	topics := make([]string, 0, len(p.retained))
	for t, m := range p.retained {
		if !m.sent {
			topics = append(topics, t)
		}
	}
	sort.Strings(topics)
	for _, t := range topics {
		if p.inflight >= cap(p.ackq) {
			return
		}
		m := p.retained[t]
		m.sent = true
		p.handOver(ackItem{tok: p.client.Publish(t, 1, true, m.payload), ret: m})
	}
}

// handOver queues a published message for the acker. The caller holds
// mu and has checked that the queue has room.
func (p *Publisher) handOver(it ackItem) {
	it.epoch = p.epoch
	p.inflight++
	p.ackq <- it
}

// sortedRuns returns the runs oldest first (by creation, then id).
// The caller holds mu.
func (p *Publisher) sortedRuns() []*runPub {
	rs := make([]*runPub, 0, len(p.runs))
	for _, r := range p.runs {
		rs = append(rs, r)
	}
	sort.Slice(rs, func(i, j int) bool {
		if !rs[i].meta.Created.Equal(rs[j].meta.Created) {
			return rs[i].meta.Created.Before(rs[j].meta.Created)
		}
		return rs[i].id < rs[j].id
	})
	return rs
}

// setRetainedLocked sets a retained topic's payload; an unchanged
// payload is not sent again. The caller holds mu.
func (p *Publisher) setRetainedLocked(topic string, payload []byte) {
	if m := p.retained[topic]; m != nil && bytes.Equal(m.payload, payload) {
		return
	}
	p.retained[topic] = &retainedMsg{payload: payload}
}

// scanStart picks the runs to publish from those already in the store:
// the Recent newest, and whole any run that has not ended.
func (p *Publisher) scanStart() {
	if p.cfg.Run != "" {
		p.track(p.cfg.Run, true)
		return
	}
	if p.cfg.Recent < 0 {
		ents, _ := os.ReadDir(p.cfg.StoreDir)
		p.mu.Lock()
		defer p.mu.Unlock()
		for _, e := range ents {
			p.runs[e.Name()] = &runPub{id: e.Name(), skip: true}
		}
		return
	}
	st, err := store.Open(p.cfg.StoreDir)
	if err != nil {
		p.cfg.Log.Warn().Err(err).Msg("publish: store not readable")
		return
	}
	list, err := st.List()
	if err != nil {
		p.cfg.Log.Warn().Err(err).Msg("publish: store not listed")
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	for i, s := range list {
		ended := s.State.Final() || s.State == event.Interrupted
		r := &runPub{id: s.ID, points: !ended, skip: ended && i >= p.cfg.Recent || s.Err != "", count: s.Points}
		if s.State == event.Interrupted {
			// Left unfinished by a process that is gone: meta.json still
			// says where it was, until the run is resumed.
			r.listedUpdated = s.Updated
		}
		p.runs[s.ID] = r
	}
}

// track starts following run id.
func (p *Publisher) track(id string, points bool) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.runs[id] == nil {
		p.runs[id] = &runPub{id: id, points: points}
	}
}

// scan reads what changed in the store since the last look.
func (p *Publisher) scan() {
	if p.cfg.Run == "" && p.storeChanged() {
		ents, err := os.ReadDir(p.cfg.StoreDir)
		if err == nil {
			for _, e := range ents {
				if e.IsDir() && store.ValidID(e.Name()) == nil {
					p.track(e.Name(), true)
				}
			}
		}
	}
	p.mu.Lock()
	rs := p.sortedRuns()
	p.mu.Unlock()
	// The current run: the newest one being measured, else the newest
	// queued, else the newest (rs is oldest first).
	var cur *runPub
	for _, r := range rs {
		if r.skip {
			continue
		}
		if r.quietScans < quietAfter {
			p.scanRun(r)
		}
		if r.meta.ID != "" && (cur == nil || rank(r.state()) >= rank(cur.state())) {
			cur = r
		}
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	p.clearOldBlocksLocked(rs)
	st := Status{Schema: Schema, Bench: p.cfg.BenchID, Online: true, Version: p.cfg.Version, KeepAliveS: p.keepAlive().Seconds()}
	if cur != nil {
		st.Run, st.RunState = cur.id, cur.state()
	}
	b, _ := json.Marshal(st)
	p.setRetainedLocked(StatusTopic(p.cfg.BenchID), b)
}

// clearOldBlocksLocked clears the retained blocks of the ended runs
// past the KeepBlocks newest, once the broker has all their points, and
// forgets those points (rs is sorted oldest first). The caller holds
// mu.
func (p *Publisher) clearOldBlocksLocked(rs []*runPub) {
	kept := 0
	for i := len(rs) - 1; i >= 0; i-- {
		r := rs[i]
		if !r.points || !r.meta.State.Final() || r.acked < len(r.pts) {
			continue
		}
		if kept < p.cfg.KeepBlocks {
			kept++
			continue
		}
		n := r.blocks
		if r.partLen > 0 {
			n++
		}
		for k := range n {
			p.setRetainedLocked(BlockTopic(p.cfg.BenchID, r.id, k), []byte{})
		}
		r.count, r.points = len(r.pts), false
		r.pts, r.ackedAt, r.acked, r.next, r.blocks, r.partLen = nil, nil, 0, 0, 0, 0
	}
}

// storeChanged reports whether the store directory may have new runs:
// its modification time moved (a run is renamed into place), or two
// seconds have passed since the last listing.
func (p *Publisher) storeChanged() bool {
	fi, err := os.Stat(p.cfg.StoreDir)
	if err != nil {
		return false
	}
	if fi.ModTime().Equal(p.dirMod) && time.Since(p.dirListed) < 2*time.Second {
		return false
	}
	p.dirMod, p.dirListed = fi.ModTime(), time.Now()
	return true
}

// rank orders states for the choice of the current run: measuring
// before queued before ended.
func rank(s event.State) int {
	switch {
	case s.Final() || s == event.Interrupted:
		return 0
	case s == event.Queued:
		return 1
	}
	return 2
}

// state is the run's state: meta.json's, or interrupted for a run found
// unfinished with no owner and not changed since.
func (r *runPub) state() event.State {
	if !r.listedUpdated.IsZero() && r.meta.Updated.Equal(r.listedUpdated) && !r.meta.State.Final() {
		return event.Interrupted
	}
	return r.meta.State
}

func (p *Publisher) keepAlive() time.Duration {
	if p.cfg.Broker.KeepAlive > 0 {
		return p.cfg.Broker.KeepAlive
	}
	return DefaultKeepAlive
}

// scanRun reads run r's meta.json, new points and result.
func (p *Publisher) scanRun(r *runPub) {
	dir := filepath.Join(p.cfg.StoreDir, r.id)
	fi, err := os.Stat(filepath.Join(dir, store.FileMeta))
	if err != nil {
		return // not complete yet, or gone
	}
	if !fi.ModTime().Equal(r.metaMod) {
		data, err := os.ReadFile(filepath.Join(dir, store.FileMeta))
		var m store.Meta
		if err == nil && json.Unmarshal(data, &m) == nil && m.ID == r.id {
			r.meta, r.metaMod = m, fi.ModTime()
		}
	}
	if r.meta.ID == "" {
		return
	}
	var newPts []point.Point
	if r.points {
		newPts = p.readPoints(r, filepath.Join(dir, store.FilePoints))
	}
	var result []byte
	if !r.result && r.meta.State.Final() {
		if data, err := os.ReadFile(filepath.Join(dir, store.FileResult)); err == nil && json.Valid(data) {
			result, _ = json.Marshal(Result{Schema: Schema, Bench: p.cfg.BenchID, Run: r.id, Result: bytes.TrimSpace(data)})
		}
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	r.pts = append(r.pts, newPts...)
	for range newPts {
		r.ackedAt = append(r.ackedAt, time.Time{})
	}
	n := len(r.pts)
	if !r.points {
		n = r.count
	}
	m := r.meta
	// A new state or message is sent at once; a new point count alone
	// at most every StateEvery (the points carry the progress live).
	if key := string(r.state()) + "\x00" + m.Message; key != r.stateKey || (n != r.stateN && time.Since(r.stateAt) >= StateEvery) || m.State.Final() {
		b, _ := json.Marshal(State{Schema: Schema, Bench: p.cfg.BenchID, Run: r.id, Name: m.Name, State: r.state(), Message: m.Message,
			Created: m.Created, Updated: m.Updated, Points: n, PlanPoints: m.Plan.Points, Plan: m.Plan})
		p.setRetainedLocked(RunTopic(p.cfg.BenchID, r.id, TopicState), b)
		r.stateKey, r.stateN, r.stateAt = key, n, time.Now()
	}
	p.setBlocksLocked(r)
	if r.meta.State.Final() {
		r.quietScans++
		if result != nil || r.result {
			r.quietScans = quietAfter
		}
	}
	if result != nil {
		r.result = true
		p.setRetainedLocked(RunTopic(p.cfg.BenchID, r.id, TopicResult), result)
	}
}

// quietAfter is how many looks an ended run gets.
const quietAfter = 20

// BlockEvery is how often the last, partial block of a run is set
// again while points arrive; StateEvery how often a run's state is set
// again for a new point count alone.
const (
	BlockEvery = 2 * time.Second
	StateEvery = time.Second
)

// setBlocksLocked sets the retained blocks of r's points: each full
// block once, the partial last one at most every BlockEvery and when
// the run has ended. The caller holds mu.
func (p *Publisher) setBlocksLocked(r *runPub) {
	if !r.points {
		return
	}
	block := func(k, n int) {
		pts := r.pts[k*BlockPoints : k*BlockPoints+n]
		b, err := json.Marshal(Block{Schema: Schema, Bench: p.cfg.BenchID, Run: r.id, FirstSeq: pts[0].Seq, LastSeq: pts[len(pts)-1].Seq, Count: len(pts), Points: pts})
		if err == nil {
			p.setRetainedLocked(BlockTopic(p.cfg.BenchID, r.id, k), b)
		}
	}
	for (r.blocks+1)*BlockPoints <= len(r.pts) {
		block(r.blocks, BlockPoints)
		r.blocks++
		r.partLen = 0
	}
	rest := len(r.pts) - r.blocks*BlockPoints
	ended := r.meta.State.Final()
	if rest > 0 && rest != r.partLen && (ended || time.Since(r.partAt) >= BlockEvery) {
		block(r.blocks, rest)
		r.partLen, r.partAt = rest, time.Now()
	}
}

// readPoints reads the complete lines appended to points.jsonl since
// the last call. A line still being written is left for the next call.
func (p *Publisher) readPoints(r *runPub, path string) []point.Point {
	fi, err := os.Stat(path)
	if err != nil || fi.Size() == r.offset {
		return nil
	}
	f, err := os.Open(path)
	if err != nil {
		return nil
	}
	defer f.Close()
	if fi, err = f.Stat(); err != nil {
		return nil
	}
	if fi.Size() < r.offset {
		// Cut back (a torn end removed by recovery): read again; the
		// points already known are skipped by seq below.
		r.offset = 0
	}
	if fi.Size() == r.offset {
		return nil
	}
	data, err := io.ReadAll(io.NewSectionReader(f, r.offset, fi.Size()-r.offset))
	if err != nil {
		return nil
	}
	p.mu.Lock()
	have := -1
	if len(r.pts) > 0 {
		have = r.pts[len(r.pts)-1].Seq
	}
	p.mu.Unlock()
	var out []point.Point
	for {
		i := bytes.IndexByte(data, '\n')
		if i < 0 {
			break
		}
		line := data[:i]
		data = data[i+1:]
		r.offset += int64(i + 1)
		if len(bytes.TrimSpace(line)) == 0 {
			continue
		}
		var pt point.Point
		if err := json.Unmarshal(line, &pt); err != nil {
			p.cfg.Log.Warn().Err(err).Str("run", r.id).Msg("unreadable point line; skipped")
			continue
		}
		if pt.Seq <= have {
			continue
		}
		have = pt.Seq
		out = append(out, pt)
	}
	return out
}

package reliability

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/gorilla/websocket"

	"rolloff/sweep/event"
	"rolloff/sweep/point"
)

// lockedBuffer is a bytes.Buffer safe for a writer and readers.
type lockedBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// proc is a rolloff subprocess.
type proc struct {
	t      *testing.T
	name   string
	cmd    *exec.Cmd
	stdout lockedBuffer
	stderr lockedBuffer
	done   chan struct{}
	err    error // Wait's error, once done is closed
	ended  time.Time
}

// startProc starts the rolloff binary with args. The process is killed at
// the end of the test if it is still running, and its output is checked
// for panics.
func startProc(t *testing.T, name string, args ...string) *proc {
	t.Helper()
	bin := needBinary(t)
	p := &proc{t: t, name: name, done: make(chan struct{})}
	p.cmd = exec.Command(bin, args...)
	p.cmd.Stdout = &p.stdout
	p.cmd.Stderr = &p.stderr
	p.cmd.Stdin = nil
	p.cmd.Env = append(os.Environ(), "ROLLOFF_TOKEN=")
	if err := p.cmd.Start(); err != nil {
		t.Fatalf("start %s: %v", name, err)
	}
	go func() {
		p.err = p.cmd.Wait()
		p.ended = time.Now()
		close(p.done)
	}()
	t.Cleanup(func() {
		select {
		case <-p.done:
		default:
			_ = p.cmd.Process.Kill()
			<-p.done
		}
		checkNoPanic(t, name, p.stdout.String()+p.stderr.String())
		if t.Failed() {
			t.Logf("%s stderr (end):\n%s", name, tail(p.stderr.String(), 3000))
		}
	})
	return p
}

// waitLine waits for a line of standard output matching re and returns its
// submatches.
func (p *proc) waitLine(re *regexp.Regexp, timeout time.Duration) []string {
	p.t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		sc := bufio.NewScanner(strings.NewReader(p.stdout.String()))
		for sc.Scan() {
			if m := re.FindStringSubmatch(sc.Text()); m != nil {
				return m
			}
		}
		select {
		case <-p.done:
			p.t.Fatalf("%s exited (%v) before printing a line matching %s:\nstdout: %s\nstderr: %s", p.name, p.err, re, p.stdout.String(), tail(p.stderr.String(), 3000))
		default:
		}
		if time.Now().After(deadline) {
			p.t.Fatalf("%s printed no line matching %s within %v:\nstdout: %s", p.name, re, timeout, p.stdout.String())
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// signal sends sig to the process and returns when it was sent.
func (p *proc) signal(sig syscall.Signal) time.Time {
	p.t.Helper()
	if err := p.cmd.Process.Signal(sig); err != nil {
		p.t.Fatalf("signal %v to %s: %v", sig, p.name, err)
	}
	return time.Now()
}

// wait waits for the process to exit; it reports false on time-out.
func (p *proc) wait(timeout time.Duration) bool {
	select {
	case <-p.done:
		return true
	case <-time.After(timeout):
		return false
	}
}

// exited reports whether the process has exited.
func (p *proc) exited() bool {
	select {
	case <-p.done:
		return true
	default:
		return false
	}
}

// exitCode is the process's exit status (-1 for a signal).
func (p *proc) exitCode() int {
	if p.cmd.ProcessState == nil {
		return -2
	}
	return p.cmd.ProcessState.ExitCode()
}

var servingLine = regexp.MustCompile(`^rolloff serving (http://127\.0\.0\.1:\d+)/$`)

// startServe starts `rolloff serve` on a free loopback port and returns
// the process and the base URL it printed.
func startServe(t *testing.T, name, benchFile, dataDir string) (*proc, *apiClient) {
	t.Helper()
	p := startProc(t, name, "--log-level", "debug", "serve", "--bench", benchFile, "--addr", "127.0.0.1:0", "--data", dataDir)
	m := p.waitLine(servingLine, 30*time.Second)
	return p, &apiClient{t: t, base: m[1]}
}

// apiClient talks to a daemon's HTTP API as the page does.
type apiClient struct {
	t    *testing.T
	base string
}

// do sends a request. A POST carries the daemon's own Origin and a JSON
// content type unless hdr overrides them ("" deletes a header; "Host"
// sets the request's Host).
func (a *apiClient) do(method, path string, body []byte, hdr ...string) (int, []byte) {
	a.t.Helper()
	var rd io.Reader
	if body != nil {
		rd = bytes.NewReader(body)
	}
	req, err := http.NewRequest(method, a.base+path, rd)
	if err != nil {
		a.t.Fatal(err)
	}
	if method == http.MethodPost {
		req.Header.Set("Content-Type", "application/json")
		req.Header.Set("Origin", a.base)
	}
	for i := 0; i+1 < len(hdr); i += 2 {
		switch {
		case hdr[i] == "Host":
			req.Host = hdr[i+1]
		case hdr[i+1] == "":
			req.Header.Del(hdr[i])
		default:
			req.Header.Set(hdr[i], hdr[i+1])
		}
	}
	c := &http.Client{Timeout: 30 * time.Second}
	res, err := c.Do(req)
	if err != nil {
		a.t.Fatalf("%s %s: %v", method, path, err)
	}
	defer res.Body.Close()
	data, _ := io.ReadAll(res.Body)
	return res.StatusCode, data
}

// runInfo is the part of GET /api/runs/{id} the tests use.
type runInfo struct {
	ID      string      `json:"id"`
	State   event.State `json:"state"`
	Message string      `json:"message"`
	Points  int         `json:"points"`
}

func (a *apiClient) runs() []runInfo {
	a.t.Helper()
	code, data := a.do("GET", "/api/runs", nil)
	if code != 200 {
		a.t.Fatalf("GET /api/runs: %d %s", code, data)
	}
	var v struct{ Runs []runInfo }
	if err := json.Unmarshal(data, &v); err != nil {
		a.t.Fatalf("GET /api/runs: %v: %s", err, data)
	}
	return v.Runs
}

func (a *apiClient) run(id string) runInfo {
	a.t.Helper()
	code, data := a.do("GET", "/api/runs/"+id, nil)
	if code != 200 {
		a.t.Fatalf("GET /api/runs/%s: %d %s", id, code, data)
	}
	var in runInfo
	if err := json.Unmarshal(data, &in); err != nil {
		a.t.Fatal(err)
	}
	return in
}

func (a *apiClient) points(id string) []point.Point {
	a.t.Helper()
	code, data := a.do("GET", "/api/runs/"+id+"/points", nil)
	if code != 200 {
		a.t.Fatalf("GET points: %d %s", code, data)
	}
	var v struct{ Points []point.Point }
	if err := json.Unmarshal(data, &v); err != nil {
		a.t.Fatal(err)
	}
	return v.Points
}

// submit posts a plan and returns the run id.
func (a *apiClient) submit(planJSON []byte) string {
	a.t.Helper()
	code, data := a.do("POST", "/api/runs", planJSON)
	if code != 201 {
		a.t.Fatalf("POST /api/runs: %d %s", code, data)
	}
	var v struct{ ID string }
	if err := json.Unmarshal(data, &v); err != nil || v.ID == "" {
		a.t.Fatalf("POST /api/runs: %s", data)
	}
	return v.ID
}

// waitState polls a run until it is in one of the states.
func (a *apiClient) waitState(id string, timeout time.Duration, states ...event.State) runInfo {
	a.t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		in := a.run(id)
		for _, s := range states {
			if in.State == s {
				return in
			}
		}
		if time.Now().After(deadline) {
			a.t.Fatalf("run %s is %s (%s) after %v, want %v", id, in.State, in.Message, timeout, states)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// live follows a run's websocket and collects the points it is told of.
type live struct {
	conn   *websocket.Conn
	mu     sync.Mutex
	points []point.Point
	final  event.State
	closed chan struct{}
}

func (a *apiClient) follow(id string) *live {
	a.t.Helper()
	url := "ws" + strings.TrimPrefix(a.base, "http") + "/api/runs/" + id + "/live"
	d := websocket.Dialer{HandshakeTimeout: 10 * time.Second, Subprotocols: []string{"rolloff.live.v1"}}
	c, res, err := d.Dial(url, http.Header{"Origin": {a.base}})
	if err != nil {
		a.t.Fatalf("dial %s: %v (%v)", url, err, res)
	}
	l := &live{conn: c, closed: make(chan struct{})}
	go func() {
		defer close(l.closed)
		for {
			var ev event.Event
			if err := c.ReadJSON(&ev); err != nil {
				return
			}
			l.mu.Lock()
			switch {
			case ev.Type == event.TypePoint && ev.Point != nil:
				l.points = append(l.points, *ev.Point)
			case ev.Type == event.TypeState && ev.State.Final():
				l.final = ev.State
			}
			l.mu.Unlock()
		}
	}()
	a.t.Cleanup(func() { c.Close() })
	return l
}

// seen returns the points told so far.
func (l *live) seen() []point.Point {
	l.mu.Lock()
	defer l.mu.Unlock()
	return append([]point.Point(nil), l.points...)
}

// waitPoints waits until at least n points were told.
func (l *live) waitPoints(t *testing.T, n int, timeout time.Duration) []point.Point {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		if pts := l.seen(); len(pts) >= n {
			return pts
		}
		select {
		case <-l.closed:
			t.Fatalf("live connection closed after %d points, want %d", len(l.seen()), n)
		default:
		}
		if time.Now().After(deadline) {
			t.Fatalf("%d points told after %v, want %d", len(l.seen()), timeout, n)
		}
		time.Sleep(2 * time.Millisecond)
	}
}

// scpiQuery sends one query to a SCPI server over a raw TCP connection
// (nothing of rolloff's) and returns the answer.
func scpiQuery(t *testing.T, addr, query string) string {
	t.Helper()
	c, err := net.DialTimeout("tcp", strings.TrimPrefix(addr, "tcp://"), 5*time.Second)
	if err != nil {
		t.Fatalf("dial %s: %v", addr, err)
	}
	defer c.Close()
	_ = c.SetDeadline(time.Now().Add(5 * time.Second))
	if _, err := fmt.Fprintf(c, "%s\n", query); err != nil {
		t.Fatalf("%s to %s: %v", query, addr, err)
	}
	line, err := bufio.NewReader(c).ReadString('\n')
	if err != nil {
		t.Fatalf("%s to %s: %v", query, addr, err)
	}
	return strings.TrimSpace(line)
}

// runDirs lists the run directories of a store directory.
func runDirs(dir string) []string {
	ents, _ := os.ReadDir(dir)
	var out []string
	for _, e := range ents {
		if e.IsDir() && !strings.HasPrefix(e.Name(), ".") {
			out = append(out, filepath.Join(dir, e.Name()))
		}
	}
	return out
}

// countLines counts the complete lines of a file.
func countLines(path string) int {
	data, _ := os.ReadFile(path)
	return bytes.Count(data, []byte("\n"))
}

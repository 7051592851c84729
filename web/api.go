package web

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"mime"
	"net/http"
	"net/url"
	"path"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"time"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/queue"
	"rolloff/sweep/sched"
	"rolloff/sweep/store"
	"rolloff/web/guard"
	"rolloff/web/hub"
	"rolloff/web/page"
)

// files maps the files a run serves (store.ResultFiles and the report)
// to their content types.
var files = map[string]string{
	store.FileResponseCSV: "text/csv; charset=utf-8",
	store.FileResult:      "application/json",
	store.FileResponsePNG: "image/png",
	store.FileResponseSVG: "image/svg+xml",
	store.FileResponsePDF: "application/pdf",
	store.FileReport:      "application/pdf",
}

// RetryAfterFullS is the Retry-After, in seconds, of a submission
// refused because the queue is full.
const RetryAfterFullS = 30

// MaxOverlayRuns is the most runs one overlay may combine.
const MaxOverlayRuns = 8

// apiError is an error with an HTTP status and the field it concerns.
type apiError struct {
	status int
	field  string
	msg    string
}

func (e *apiError) Error() string { return e.msg }

func badRequest(field, format string, a ...any) error {
	return &apiError{status: http.StatusBadRequest, field: field, msg: fmt.Sprintf(format, a...)}
}

// fail writes err in the error format, choosing the status from its kind.
func (s *Server) fail(w http.ResponseWriter, err error) {
	var ae *apiError
	var fe *plan.FieldError
	var mbe *http.MaxBytesError
	switch {
	case errors.As(err, &ae):
		guard.WriteError(w, ae.status, ae.field, ae.msg)
	case errors.As(err, &mbe):
		guard.WriteError(w, http.StatusRequestEntityTooLarge, "body", fmt.Sprintf("body larger than %d bytes", mbe.Limit))
	case errors.As(err, &fe):
		guard.WriteError(w, http.StatusBadRequest, fe.Field, s.scrub(err.Error()))
	case errors.Is(err, sched.ErrNoPrompt):
		guard.WriteError(w, http.StatusConflict, "prompt_id", err.Error())
	case errors.Is(err, sched.ErrBadRange):
		guard.WriteError(w, http.StatusBadRequest, "range_index", err.Error())
	case errors.Is(err, sched.ErrFinished), errors.Is(err, sched.ErrNotPaused):
		guard.WriteError(w, http.StatusConflict, "state", err.Error())
	case errors.Is(err, queue.ErrNotFound):
		guard.WriteError(w, http.StatusNotFound, "id", err.Error())
	case errors.Is(err, queue.ErrState):
		guard.WriteError(w, http.StatusConflict, "state", err.Error())
	case errors.Is(err, queue.ErrFull):
		w.Header().Set("Retry-After", strconv.Itoa(RetryAfterFullS))
		guard.WriteError(w, http.StatusTooManyRequests, "", "the queue is full: "+err.Error()+"; try again later")
	case errors.Is(err, queue.ErrClosed):
		guard.WriteError(w, http.StatusServiceUnavailable, "", "the daemon is shutting down")
	case errors.Is(err, syscall.EROFS):
		s.log.Error().Err(err).Msg("request failed")
		guard.WriteError(w, http.StatusInsufficientStorage, "", "the run store is on a read-only file system: nothing can be recorded")
	case errors.Is(err, syscall.ENOSPC):
		s.log.Error().Err(err).Msg("request failed")
		guard.WriteError(w, http.StatusInsufficientStorage, "", "the run store's disk is full: nothing can be recorded")
	default:
		// The cause may name files of the machine: the log has it, the
		// answer does not.
		s.log.Error().Err(err).Msg("request failed")
		guard.WriteError(w, http.StatusInternalServerError, "", "internal error; the daemon's log has the cause")
	}
}

// scrub takes the run store's directory out of a message meant for a
// client: the page's user needs the run id, not where the daemon keeps
// its files.
func (s *Server) scrub(msg string) string {
	d, ok := s.be.(interface{ dataDir() string })
	if !ok {
		return msg
	}
	dir := d.dataDir()
	if dir == "" {
		return msg
	}
	if abs, err := filepath.Abs(dir); err == nil && abs != dir {
		msg = strings.ReplaceAll(msg, abs, "the run store")
	}
	return strings.ReplaceAll(msg, dir, "the run store")
}

func writeJSON(w http.ResponseWriter, status int, v any) {
	h := w.Header()
	h.Set("Content-Type", "application/json; charset=utf-8")
	h.Set("Cache-Control", "no-store")
	h.Set("X-Content-Type-Options", "nosniff")
	w.WriteHeader(status)
	enc := json.NewEncoder(w)
	_ = enc.Encode(v)
}

// method refuses a request made with another method than want (405).
func method(w http.ResponseWriter, r *http.Request, want string) bool {
	if r.Method == want || (want == http.MethodGet && r.Method == http.MethodHead) {
		return true
	}
	allow := want
	if want == http.MethodGet {
		allow = "GET, HEAD"
	}
	w.Header().Set("Allow", allow)
	guard.WriteError(w, http.StatusMethodNotAllowed, "method", fmt.Sprintf("%s %s: use %s", r.Method, r.URL.Path, want))
	return false
}

// validID checks a run id taken from a path or a query (the run store's
// syntax: letters, digits, '.', '_' and '-', no "..").
func validID(id string) error {
	if err := plan.CheckRunID(id); err != nil {
		return badRequest("id", "run id %q: %v", clip(id), err)
	}
	return nil
}

func clip(s string) string {
	if len(s) > 80 {
		return s[:80] + "..."
	}
	return s
}

// route dispatches on the escaped path, so that a run id containing an
// encoded slash or dots reaches validID instead of being cleaned away.
func (s *Server) route(w http.ResponseWriter, r *http.Request) {
	p := r.URL.EscapedPath()
	switch {
	case p == "/" || p == "/index.html":
		if method(w, r, http.MethodGet) {
			s.index(w, r)
		}
		return
	case p == "/line":
		if method(w, r, http.MethodGet) {
			s.linePage(w, r)
		}
		return
	case p == "/app.js" || p == "/plot.js" || p == "/style.css" || p == "/line.js" || p == "/line.css":
		if method(w, r, http.MethodGet) {
			s.asset(w, r, p[1:])
		}
		return
	case p == "/favicon.ico":
		w.WriteHeader(http.StatusNoContent)
		return
	case p == "/api/bench":
		if method(w, r, http.MethodGet) {
			s.bench(w, r)
		}
		return
	case p == "/api/runs":
		switch r.Method {
		case http.MethodGet, http.MethodHead:
			s.listRuns(w, r)
		case http.MethodPost:
			s.submit(w, r)
		default:
			method(w, r, http.MethodPost)
		}
		return
	case p == "/api/plan/estimate":
		if method(w, r, http.MethodPost) {
			s.estimate(w, r)
		}
		return
	case p == "/api/overlay.png" || p == "/api/overlay.svg" || p == "/api/overlay.pdf":
		if method(w, r, http.MethodGet) {
			s.overlay(w, r, path.Ext(p)[1:])
		}
		return
	case strings.HasPrefix(p, "/api/runs/"):
		s.runRoute(w, r, strings.TrimPrefix(p, "/api/runs/"))
		return
	case strings.HasPrefix(p, "/api/batches/"):
		s.batchRoute(w, r, strings.TrimPrefix(p, "/api/batches/"))
		return
	}
	guard.WriteError(w, http.StatusNotFound, "path", fmt.Sprintf("no such resource %q", clip(r.URL.Path)))
}

func (s *Server) runRoute(w http.ResponseWriter, r *http.Request, rest string) {
	parts := strings.Split(rest, "/")
	id, err := url.PathUnescape(parts[0])
	if err != nil {
		s.fail(w, badRequest("id", "run id %q: bad escape", clip(parts[0])))
		return
	}
	if err := validID(id); err != nil {
		s.fail(w, err)
		return
	}
	for _, seg := range parts[1:] {
		if u, err := url.PathUnescape(seg); err != nil || u == "." || u == ".." || strings.ContainsAny(u, "/\\") {
			s.fail(w, badRequest("path", "path segment %q refused", clip(seg)))
			return
		}
	}
	switch {
	case len(parts) == 1:
		if method(w, r, http.MethodGet) {
			s.runInfo(w, r, id)
		}
	case len(parts) == 2 && (parts[1] == "pause" || parts[1] == "resume" || parts[1] == "abort" || parts[1] == "confirm"):
		if method(w, r, http.MethodPost) {
			s.control(w, r, id, parts[1])
		}
	case len(parts) == 2 && parts[1] == "points":
		if method(w, r, http.MethodGet) {
			s.points(w, r, id)
		}
	case len(parts) == 2 && parts[1] == "live":
		if method(w, r, http.MethodGet) {
			s.live(w, r, id)
		}
	case len(parts) == 3 && parts[1] == "files":
		if method(w, r, http.MethodGet) {
			s.file(w, r, id, parts[2])
		}
	default:
		guard.WriteError(w, http.StatusNotFound, "path", fmt.Sprintf("no such resource %q", clip(r.URL.Path)))
	}
}

// securityHeaders are set on the page and its assets.
func securityHeaders(w http.ResponseWriter, r *http.Request) {
	h := w.Header()
	h.Set("Content-Security-Policy", "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' blob: data:; "+
		"connect-src 'self' ws://"+r.Host+"; base-uri 'none'; form-action 'none'; frame-ancestors 'none'")
	h.Set("X-Content-Type-Options", "nosniff")
	h.Set("X-Frame-Options", "DENY")
	h.Set("Referrer-Policy", "no-referrer")
	h.Set("Cache-Control", "no-store")
}

func (s *Server) index(w http.ResponseWriter, r *http.Request) {
	d := page.Data{NeedToken: s.guard.TokenRequired(), Version: s.cfg.Version}
	if d.Version == "" {
		d.Version = "(devel)"
	}
	if d.NeedToken {
		if code := r.URL.Query().Get("once"); code != "" {
			if t, ok := s.guard.ExchangeOnce(code); ok {
				d.Token = t
			} else {
				guard.WriteError(w, http.StatusForbidden, "once", "this one-time link was used already or is unknown")
				return
			}
		} else if isLoopbackRemote(r) {
			d.Token = s.guard.Token()
		}
	}
	var buf bytes.Buffer
	if err := page.Index(&buf, d); err != nil {
		s.fail(w, err)
		return
	}
	securityHeaders(w, r)
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	_, _ = w.Write(buf.Bytes())
}

func (s *Server) asset(w http.ResponseWriter, r *http.Request, name string) {
	data, err := readAsset(name)
	if err != nil {
		guard.WriteError(w, http.StatusNotFound, "path", "no such asset")
		return
	}
	securityHeaders(w, r)
	ct := mime.TypeByExtension(path.Ext(name))
	if strings.HasSuffix(name, ".js") {
		ct = "text/javascript; charset=utf-8"
	}
	w.Header().Set("Content-Type", ct)
	http.ServeContent(w, r, name, time.Time{}, bytes.NewReader(data))
}

func (s *Server) bench(w http.ResponseWriter, r *http.Request) {
	info := s.be.Info()
	info.Running = s.queue.RunningID()
	_, info.Queued = s.queue.Page(func(in *queue.Info) bool { return in.State == event.Queued }, 0, 0)
	writeJSON(w, http.StatusOK, info)
}

// readBody reads a request body within the guard's limit.
func readBody(r *http.Request) ([]byte, error) {
	data, err := io.ReadAll(r.Body)
	if err != nil {
		return nil, err
	}
	return data, nil
}

// decodePlan reads a plan from a request body: the plan itself as JSON
// with the plan file's field names, or {"plan_toml": "...", "file_name":
// "..."} carrying a TOML plan file's text, or {"plan_json": "...",
// "file_name": "..."} a JSON plan file's text (decoded here, strictly,
// so that errors name the file and line).
func (s *Server) decodePlan(r *http.Request) (*plan.Plan, queue.Source, error) {
	var src queue.Source
	data, err := readBody(r)
	if err != nil {
		return nil, src, err
	}
	if len(bytes.TrimSpace(data)) == 0 {
		return nil, src, badRequest("body", "empty body: want a plan as JSON, or {\"plan_toml\": \"...\"}")
	}
	var probe map[string]json.RawMessage
	if err := json.Unmarshal(data, &probe); err != nil {
		return nil, src, badRequest("body", "request body: not a JSON object: %v", err)
	}
	var p *plan.Plan
	_, isTOML := probe["plan_toml"]
	_, isJSON := probe["plan_json"]
	if isTOML || isJSON {
		src, err = decodeUpload(data)
		if err != nil {
			return nil, src, err
		}
		if isJSON {
			p, err = plan.DecodeJSON(src.Name, src.Data)
		} else {
			p, err = plan.DecodeTOML(src.Name, src.Data)
		}
	} else {
		src = queue.Source{Name: "request.json", Data: data}
		p, err = plan.DecodeJSON("request body", data)
	}
	if err != nil {
		return nil, src, err
	}
	p.Defaults()
	if err := p.Validate(s.be.Limits()); err != nil {
		return nil, src, err
	}
	if err := s.be.CheckThrough(p); err != nil {
		return nil, src, err
	}
	if c, ok := s.be.(interface{ CheckPlan(*plan.Plan) error }); ok {
		if err := c.CheckPlan(p); err != nil { // against the bench, before it is queued
			return nil, src, err
		}
	}
	return p, src, nil
}

func (s *Server) estimate(w http.ResponseWriter, r *http.Request) {
	p, _, err := s.decodePlan(r)
	if err != nil {
		s.fail(w, err)
		return
	}
	est, err := s.be.Estimate(p)
	if err != nil {
		s.fail(w, err)
		return
	}
	writeJSON(w, http.StatusOK, est)
}

func (s *Server) submit(w http.ResponseWriter, r *http.Request) {
	p, src, err := s.decodePlan(r)
	if err != nil {
		s.fail(w, err)
		return
	}
	id, err := s.queue.Submit(r.Context(), p, src)
	if err != nil {
		s.fail(w, err)
		return
	}
	w.Header().Set("Location", "/api/runs/"+url.PathEscape(id))
	writeJSON(w, http.StatusCreated, map[string]string{"id": id})
}

func (s *Server) runInfo(w http.ResponseWriter, r *http.Request, id string) {
	in, err := s.queue.Get(id)
	if err != nil {
		s.fail(w, err)
		return
	}
	writeJSON(w, http.StatusOK, in)
}

// confirmBody is the body of POST /api/runs/{id}/confirm.
type confirmBody struct {
	PromptID   *int `json:"prompt_id"`
	RangeIndex *int `json:"range_index"`
}

func (s *Server) control(w http.ResponseWriter, r *http.Request, id, op string) {
	data, err := readBody(r)
	if err != nil {
		s.fail(w, err)
		return
	}
	if _, err := s.queue.Get(id); err != nil {
		s.fail(w, err)
		return
	}
	switch op {
	case "pause", "resume", "abort":
		// The body is optional and must be an empty object when given.
		if t := bytes.TrimSpace(data); len(t) > 0 {
			var m map[string]json.RawMessage
			if err := json.Unmarshal(t, &m); err != nil || len(m) > 0 {
				s.fail(w, badRequest("body", "%s takes no fields: send {} or nothing", op))
				return
			}
		}
		switch op {
		case "pause":
			err = s.queue.Pause(id)
		case "resume":
			err = s.queue.Resume(r.Context(), id)
		case "abort":
			err = s.queue.Abort(r.Context(), id)
		}
	case "confirm":
		var b confirmBody
		dec := json.NewDecoder(bytes.NewReader(data))
		dec.DisallowUnknownFields()
		if err := dec.Decode(&b); err != nil {
			s.fail(w, badRequest("body", "confirm: %v (want {\"prompt_id\": n, \"range_index\": i})", err))
			return
		}
		if dec.More() {
			s.fail(w, badRequest("body", "confirm: data after the object"))
			return
		}
		if b.PromptID == nil || *b.PromptID < 0 {
			s.fail(w, badRequest("prompt_id", "confirm: prompt_id missing or negative: want the id of the pending prompt"))
			return
		}
		nr := len(s.be.Info().Ranges)
		if b.RangeIndex == nil || *b.RangeIndex < 0 || (nr > 0 && *b.RangeIndex >= nr) {
			s.fail(w, badRequest("range_index", "confirm: range_index missing or out of range: want 0..%d", nr-1))
			return
		}
		in, _ := s.queue.Get(id)
		if in.Prompt == nil {
			s.fail(w, &apiError{status: http.StatusConflict, field: "prompt_id", msg: fmt.Sprintf("run %s has no pending prompt", id)})
			return
		}
		if in.Prompt.ID != *b.PromptID {
			s.fail(w, &apiError{status: http.StatusConflict, field: "prompt_id", msg: fmt.Sprintf("prompt %d is not the pending one (%d)", *b.PromptID, in.Prompt.ID)})
			return
		}
		if in.Prompt.RangeIndex != *b.RangeIndex {
			s.fail(w, &apiError{status: http.StatusConflict, field: "range_index", msg: fmt.Sprintf("prompt %d asks for range %d (%s), not %d", in.Prompt.ID, in.Prompt.RangeIndex, in.Prompt.Range, *b.RangeIndex)})
			return
		}
		// No hand on the simulated bench: move its range switch first.
		s.be.Confirmed(*b.RangeIndex)
		err = s.queue.Confirm(id, *b.PromptID, *b.RangeIndex)
	}
	if err != nil {
		s.fail(w, err)
		return
	}
	in, _ := s.queue.Get(id)
	writeJSON(w, http.StatusOK, in)
}

func (s *Server) points(w http.ResponseWriter, r *http.Request, id string) {
	if _, err := s.queue.Get(id); err != nil {
		s.fail(w, err)
		return
	}
	from := 0
	if v := r.URL.Query().Get("from_seq"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 0 {
			s.fail(w, badRequest("from_seq", "from_seq %q: want an integer >= 0", clip(v)))
			return
		}
		from = n
	}
	pts, err := s.be.Points(r.Context(), id)
	if err != nil {
		s.fail(w, err)
		return
	}
	out := make([]point.Point, 0, len(pts))
	for _, p := range pts {
		if p.Seq >= from {
			out = append(out, p)
		}
	}
	writeJSON(w, http.StatusOK, map[string]any{"id": id, "points": out})
}

func (s *Server) file(w http.ResponseWriter, r *http.Request, id, name string) {
	ct, ok := files[name]
	if !ok {
		guard.WriteError(w, http.StatusNotFound, "name", fmt.Sprintf("file %q: want one of %s", clip(name), strings.Join(append(store.ResultFiles(), store.FileReport), ", ")))
		return
	}
	if _, err := s.queue.Get(id); err != nil {
		s.fail(w, err)
		return
	}
	f, mod, err := s.be.OpenFile(r.Context(), id, name)
	if err != nil {
		if errors.Is(err, errNoFile) {
			guard.WriteError(w, http.StatusNotFound, "name", fmt.Sprintf("run %s has no %s yet (exports are written when a run is done)", id, name))
			return
		}
		s.fail(w, err)
		return
	}
	defer f.Close()
	h := w.Header()
	h.Set("Content-Type", ct)
	h.Set("X-Content-Type-Options", "nosniff")
	h.Set("Cache-Control", "no-store")
	if strings.HasSuffix(name, ".svg") {
		h.Set("Content-Security-Policy", "default-src 'none'; style-src 'unsafe-inline'")
	}
	h.Set("Content-Disposition", fmt.Sprintf("attachment; filename=%q", id+"-"+name))
	http.ServeContent(w, r, name, mod, f)
}

func (s *Server) overlay(w http.ResponseWriter, r *http.Request, format string) {
	q := r.URL.Query()
	raw := q.Get("runs")
	if raw == "" {
		s.fail(w, badRequest("runs", "runs: want a comma-separated list of 1..%d run ids", MaxOverlayRuns))
		return
	}
	ids := strings.Split(raw, ",")
	if len(ids) > MaxOverlayRuns {
		s.fail(w, badRequest("runs", "runs: %d ids: at most %d", len(ids), MaxOverlayRuns))
		return
	}
	seen := map[string]bool{}
	for _, id := range ids {
		if err := validID(id); err != nil {
			s.fail(w, err)
			return
		}
		if seen[id] {
			s.fail(w, badRequest("runs", "runs: %q given twice", id))
			return
		}
		seen[id] = true
		if _, err := s.queue.Get(id); err != nil {
			s.fail(w, err)
			return
		}
	}
	diff := false
	switch q.Get("diff") {
	case "", "0", "false":
	case "1", "true":
		diff = true
	default:
		s.fail(w, badRequest("diff", "diff %q: want 1 or 0", clip(q.Get("diff"))))
		return
	}
	if diff && len(ids) < 2 {
		s.fail(w, badRequest("diff", "diff needs at least two runs"))
		return
	}
	var buf bytes.Buffer
	ctx, cancel := context.WithTimeout(r.Context(), 20*time.Second)
	defer cancel()
	if err := s.be.Overlay(ctx, &buf, format, ids, diff); err != nil {
		s.fail(w, err)
		return
	}
	ct := map[string]string{"png": "image/png", "svg": "image/svg+xml", "pdf": "application/pdf"}[format]
	h := w.Header()
	h.Set("Content-Type", ct)
	h.Set("X-Content-Type-Options", "nosniff")
	h.Set("Cache-Control", "no-store")
	if format == "svg" {
		h.Set("Content-Security-Policy", "default-src 'none'; style-src 'unsafe-inline'")
	}
	_, _ = w.Write(buf.Bytes())
}

// encodeEvent is the live message for an event: event.Event as JSON.
func encodeEvent(ev event.Event) ([]byte, error) {
	return json.Marshal(ev)
}

func (s *Server) live(w http.ResponseWriter, r *http.Request, id string) {
	if _, err := s.queue.Get(id); err != nil {
		s.fail(w, err)
		return
	}
	if !guard.IsUpgrade(r) {
		guard.WriteError(w, http.StatusBadRequest, "upgrade", "this is a websocket endpoint")
		return
	}
	conn, err := s.upgrader.Upgrade(w, r, nil)
	if err != nil {
		return // the upgrader answered
	}
	if _, err := s.hub.Attach(conn, id, s.replayer(id), nil); err != nil {
		_ = conn.Close()
	}
}

// replayer sends a joining client what run id has so far: its state, the
// stored points from fromSeq on, its progress, pending prompt and result.
func (s *Server) replayer(id string) hub.ReplayFunc {
	return func(ctx context.Context, fromSeq int, send func(hub.Message) error) (int, error) {
		last := fromSeq - 1
		in, err := s.queue.Get(id)
		if err != nil {
			return last, err
		}
		now := time.Now().UTC()
		if fromSeq == 0 {
			if err := s.sendEvent(send, event.Event{Time: now, Type: event.TypeState, Run: id, State: in.State, Message: in.Message}); err != nil {
				return last, err
			}
		}
		pts, err := s.be.Points(ctx, id)
		if err != nil && !errors.Is(err, errNoFile) {
			return last, err
		}
		for i := range pts {
			p := pts[i]
			if p.Seq < fromSeq {
				continue
			}
			if err := s.sendEvent(send, event.Event{Time: p.Time, Type: event.TypePoint, Run: id, Point: &p}); err != nil {
				return last, err
			}
			if p.Seq > last {
				last = p.Seq
			}
		}
		if fromSeq == 0 {
			if in.Progress != nil {
				if err := s.sendEvent(send, event.Event{Time: now, Type: event.TypeProgress, Run: id, Progress: in.Progress}); err != nil {
					return last, err
				}
			}
			if in.Prompt != nil && in.State == event.WaitingOperator {
				if err := s.sendEvent(send, event.Event{Time: now, Type: event.TypePrompt, Run: id, Prompt: in.Prompt}); err != nil {
					return last, err
				}
			}
			if len(in.Result) > 0 {
				if err := s.sendEvent(send, event.Event{Time: now, Type: event.TypeResult, Run: id, Result: in.Result}); err != nil {
					return last, err
				}
			}
		}
		return last, nil
	}
}

func (s *Server) sendEvent(send func(hub.Message) error, ev event.Event) error {
	data, err := encodeEvent(ev)
	if err != nil {
		return err
	}
	seq := hub.NoSeq
	if ev.Point != nil {
		seq = ev.Point.Seq
	}
	return send(hub.NewMessage(data, seq))
}

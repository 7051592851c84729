package web

import (
	"bytes"
	"net/http"

	"rolloff/web/guard"
	"rolloff/web/page"
)

// linePage serves the production-line page (GET /line), handing it the
// token as the index page does.
func (s *Server) linePage(w http.ResponseWriter, r *http.Request) {
	d := page.Data{NeedToken: s.guard.TokenRequired(), Version: s.cfg.Version}
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
	if err := page.Line(&buf, d); err != nil {
		s.fail(w, err)
		return
	}
	securityHeaders(w, r)
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	_, _ = w.Write(buf.Bytes())
}

package dashboard

import (
	"bytes"
	"fmt"
	"net/http"
)

// reportCSP lets the report's inline CSS apply and nothing else: the page
// has no scripts, images or external files.
const reportCSP = "default-src 'none'; style-src 'unsafe-inline'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'"

// runReport serves the printable report of a run through Config.Report
// (the same HTML as `liftyard report`). The route answers 404 when the
// report capability is off (routes).
func (s *Server) runReport(w http.ResponseWriter, r *http.Request) {
	id, err := runID(r)
	if err != nil {
		s.fail(w, r, err, false)
		return
	}
	var buf bytes.Buffer
	if err := s.report(&buf, id); err != nil {
		s.fail(w, r, fmt.Errorf("report of run %d: %w", id, err), false)
		return
	}
	h := w.Header()
	h.Set("Content-Type", "text/html; charset=utf-8")
	h.Set("Cache-Control", "no-store")
	h.Set("Content-Security-Policy", reportCSP)
	buf.WriteTo(w)
}

package dashboard

import (
	"bytes"
	"fmt"
	"net/http"

	"liftyard/report"
	"liftyard/storage"
)

// reportCSP lets the report's inline CSS apply and nothing else: the page
// has no scripts, images or external files.
const reportCSP = "default-src 'none'; style-src 'unsafe-inline'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'"

// runReport serves the printable report of a run (the same HTML as
// `liftyard report`). It needs the store itself (report.Build reads
// events, calibrations and the stored rig file), so a dashboard whose
// RunStore is not a *storage.Store answers 404.
func (s *Server) runReport(w http.ResponseWriter, r *http.Request) {
	id, err := runID(r)
	if err != nil {
		s.fail(w, r, err, false)
		return
	}
	st, ok := s.store.(*storage.Store)
	if !ok || st == nil {
		http.Error(w, "no report: this dashboard has no store attached", http.StatusNotFound)
		return
	}
	rep, err := report.Build(st, id, report.Options{Now: s.now})
	if err != nil {
		s.fail(w, r, err, false)
		return
	}
	var buf bytes.Buffer
	if err := rep.WriteHTML(&buf); err != nil {
		s.fail(w, r, fmt.Errorf("report of run %d: %w", id, err), false)
		return
	}
	h := w.Header()
	h.Set("Content-Type", "text/html; charset=utf-8")
	h.Set("Cache-Control", "no-store")
	h.Set("Content-Security-Policy", reportCSP)
	buf.WriteTo(w)
}

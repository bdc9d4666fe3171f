// Package dashboard serves liftyard's local web dashboard: a live page, run
// pages with the report's plot of the run, and a JSON API. It formats what
// estimate produced and storage kept; it computes no physics (the only
// conversions are for display: radians to degrees, and standard to expanded
// uncertainty U95).
//
// # Capabilities
//
// What a dashboard offers is its Config, wired by cmd/liftyard: Runs (the
// run list and pages), Live (a recording feeds the live page), Marks and
// ApplyMarks (marks shown, and edited), Report (the printable report) and
// Calibrations. Each is a small interface or func; nil (false) means off:
// no page offers it and its routes answer 404 with a message naming it.
//
// # Rig kinds
//
// Each rig kind has a view (kinds.go: which plot, which tables, which
// cautions); the pages ask the view, never the kind string.
//
// # Routes
//
//	GET  /                          live page (one EventSource, trends drawn by /static/live.js)
//	GET  /runs                      table of runs
//	GET  /runs/{id}                 run details, source health, segments or zones
//	GET  /runs/{id}/polar.svg       C_L against α (S for rotors) with U95 bars (the report's plot)
//	GET  /runs/{id}/zones.svg       net Cp per roof zone and block (the report's plot)
//	GET  /runs/{id}/report          the printable report (Config.Report)
//	GET  /static/...                the embedded script, style sheet and icon
//	POST /logout                    clears the token cookie (off loopback)
//	GET  /api/v1/live               latest estimate (503 before the first one; Config.Live)
//	GET  /api/v1/health             latest source health (Config.Live)
//	GET  /api/v1/runs               runs, newest first
//	GET  /api/v1/runs/{id}          one run
//	GET  /api/v1/runs/{id}/segments its steady segments (docs/columns.md)
//	GET  /api/v1/stream             server-sent events: run, health, live, segment (Config.Live)
//	     /calibrations, /api/v1/calibrations/...  stored calibrations (Config.Calibrations)
//	     /api/v1/runs/{id}/marks...               user marks (Config.Marks, ApplyMarks; marks.go)
//
// JSON fields are the Go field names in snake_case with their unit
// (q_pa, speed_m_s, alpha_deg, cl_u95); a quantity that was not measured or
// could not be computed is null. Errors: 400 for a malformed id, 404 for an
// unknown run (storage.ErrNotFound), 500 with the detail in the log only.
//
// # Security model
//
// Bound to loopback (the default, 127.0.0.1:8470), the server answers only
// requests whose Host is 127.0.0.1, localhost or [::1] with its own port,
// which defeats DNS rebinding. Bound elsewhere, New requires a token of at
// least MinTokenLen characters and every request must carry it, as
// "Authorization: Bearer TOKEN" or in the HttpOnly cookie that opening
// /?token=TOKEN sets; tokens are compared in constant time and never logged.
// http.CrossOriginProtection rejects cross-origin browser POSTs; GET never
// changes state. Pages are html/template with a strict Content-Security-
// Policy (scripts and styles from /static only), so rig and channel names
// from files are always text.
//
// # Concurrency
//
// SetRun and the Publish methods may be called from any goroutine and never
// wait for a browser. A hub fans each event out to the stream clients, each
// with a buffer of SubscriberBuffer events; a client whose buffer is full is
// disconnected and counted (Stats.Disconnected), and its browser reconnects
// and starts again from a snapshot of the current run, health, latest
// estimate and segments (a Last-Event-ID skips segments it saw). Writes to
// a client have a per-write deadline instead of http.Server.WriteTimeout,
// idle streams send a comment every 15 s, and Serve ends all streams when
// it shuts down.
//
// # Caveats
//
// The plot cache is keyed by run and segment count; applying marks drops
// the run's plots, but segments rewritten by another process with the same
// count show the old plot until this one restarts. The live trends hold
// what the page received since it opened.
package dashboard

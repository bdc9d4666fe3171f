package dashboard

import "net/http"

// caps is what this dashboard can do, for the templates: a page offers a
// link or a form only when its capability is on (Config).
type caps struct {
	Live         bool // a recording feeds the live page
	Marks        bool // run pages show the marks
	EditMarks    bool // and may change them
	Report       bool // run pages link to the printable report
	Timeline     bool // run pages plot the run against time (timeline.go)
	Calibrations bool // the calibration pages exist
	Compare      bool // the run-against-run page exists (compare.go)
	Acknowledge  bool // the live page may acknowledge a held overload alarm
}

func (s *Server) caps() caps {
	return caps{
		Live:         s.live,
		Marks:        s.marks != nil,
		EditMarks:    s.marks != nil && s.apply != nil,
		Report:       s.report != nil,
		Timeline:     s.timeline != nil,
		Calibrations: s.cals != nil,
		Compare:      s.compare != nil,
		Acknowledge:  s.live && s.ack != nil,
	}
}

// Messages of the 404 that a route of a capability that is off answers.
const (
	offLive         = "the live feed is off on this dashboard: no recording feeds it (liftyard record and liftyard demo do)"
	offMarks        = "marks are off on this dashboard: it was started without a mark store (liftyard serve --db FILE shows and edits marks)"
	offReport       = "the report is off on this dashboard: it was started without a report writer (liftyard report --db FILE --run ID writes one)"
	offCalibrations = "calibrations are off on this dashboard: it was started without a calibration store"
	offAck          = "overload acknowledgement is off on this dashboard: no recording feeds it"
	offCompare      = "run against run is off on this dashboard: it was started without a run store to compare from (liftyard compare --db FILE --runs 3,5 prints it)"
)

// need returns h when on, else a handler that answers 404 with msg (JSON
// on API routes).
func (s *Server) need(on bool, msg string, api bool, h http.HandlerFunc) http.HandlerFunc {
	if on {
		return h
	}
	return func(w http.ResponseWriter, r *http.Request) {
		if api {
			writeJSONStatus(w, http.StatusNotFound, map[string]string{"error": msg})
			return
		}
		s.errorPage(w, r, http.StatusNotFound, msg)
	}
}

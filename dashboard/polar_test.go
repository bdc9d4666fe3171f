package dashboard_test

import (
	"bytes"
	"encoding/xml"
	"errors"
	"io"
	"math"
	"regexp"
	"strings"
	"testing"

	"liftyard/dashboard"
)

// wellFormed decodes every XML token of an SVG.
func wellFormed(t *testing.T, svg []byte) {
	t.Helper()
	d := xml.NewDecoder(bytes.NewReader(svg))
	for {
		_, err := d.Token()
		if errors.Is(err, io.EOF) {
			return
		}
		if err != nil {
			t.Fatalf("SVG not well-formed: %v", err)
		}
	}
}

// Ensure that the polar is a well-formed SVG with labelled axes, that a
// segment without C_L is dropped and the caption says so, and that an empty
// run still gives a plot.
func TestPolarSVG(t *testing.T) {
	st := testRuns()
	bad := segment(3, 12, 0)
	bad.CL.X = math.NaN()
	st.segs[1] = append(st.segs[1], bad)
	st.segs[2] = nil
	s, _ := newServer(t, dashboard.Config{Live: true, Runs: st})
	rec := get(t, s.Handler(), "GET", "/runs/1/polar.svg", nil)
	if rec.Code != 200 {
		t.Fatalf("status %d: %s", rec.Code, rec.Body)
	}
	svg := rec.Body.Bytes()
	wellFormed(t, svg)
	// Subscripts are set as such: strip their markup to read the words.
	text := regexp.MustCompile(`</?tspan[^>]*>`).ReplaceAllString(string(svg), "")
	if strings.Contains(string(svg), "C_L") {
		t.Error("SVG shows a literal C_L")
	}
	for _, want := range []string{"CL", "angle of attack α [°]", "1 segment(s) without CL or abscissa not shown", "sans-serif"} {
		if !strings.Contains(text, want) {
			t.Errorf("SVG lacks %q", want)
		}
	}
	// Cached: the same bytes again.
	if again := get(t, s.Handler(), "GET", "/runs/1/polar.svg", nil).Body.Bytes(); !bytes.Equal(again, svg) {
		t.Error("second rendering differs")
	}
	empty := get(t, s.Handler(), "GET", "/runs/2/polar.svg", nil)
	if empty.Code != 200 {
		t.Fatalf("empty run: %d", empty.Code)
	}
	wellFormed(t, empty.Body.Bytes())
	if !strings.Contains(empty.Body.String(), "no segments with C<tspan") {
		t.Error("empty polar does not say it is empty")
	}
	// A new segment of the current run renders anew.
	s.SetRun(st.runs[2])
	s.PublishSegment(segment(0, 2, 0.22))
	if b := get(t, s.Handler(), "GET", "/runs/2/polar.svg", nil).Body.String(); strings.Contains(b, "no segments with C<tspan") {
		t.Error("polar of the current run not re-rendered after a new segment")
	}
}

package dashboard

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"mime"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"
	"unicode"
	"unicode/utf8"

	"liftyard/estimate"
	"liftyard/process"
	"liftyard/storage"
)

// MarkStore keeps the user marks of stored runs (steady segments set by
// hand). With Config.Marks set, the run pages show a run's marks; with
// Config.ApplyMarks set too, they offer a form to add marks and a button to
// apply them, and these routes change state:
//
//	GET  /api/v1/runs/{id}/marks                 the marks, and whether they can be edited
//	POST /api/v1/runs/{id}/marks                 add one mark: {"start_s": 12.0, "end_s": 15.5, "label": "…"}
//	POST /api/v1/runs/{id}/marks/{n}/delete      remove mark n (1-based)
//	POST /api/v1/runs/{id}/marks/clear           remove every mark
//	POST /api/v1/runs/{id}/marks/apply           recompute the segments with the marks (Config.ApplyMarks)
//
// The POST routes go through the same checks as every request (Host check
// on loopback, token off it, cross-origin protection).
//
// Its methods may be called concurrently from HTTP handlers; the dashboard
// serialises its own read-modify-write of marks. Marks returns a run's
// marks in time order (none is not an error); PutMarks replaces them all
// (nil clears them). RunStart is the time of the run's first sample on the
// clock of its segments (Segment.TStart): marks are entered in seconds from
// it; it returns an error when the run has no raw samples. The returned
// slices belong to the caller.
type MarkStore interface {
	Marks(runID uint64) ([]estimate.Mark, error)
	PutMarks(runID uint64, marks []estimate.Mark) error
	RunStart(runID uint64) (time.Time, error)
}

// MarksApplied is the outcome of Config.ApplyMarks; its home is the
// pipeline that produces it.
type MarksApplied = process.MarksApplied

// maxMarkBody bounds a mark request body: a mark is a few dozen bytes.
const maxMarkBody = 4 << 10

// marksMu serialises the read-modify-write of marks (add, delete, apply)
// across requests.
var marksMu sync.Mutex

// markBody is the JSON body of POST /api/v1/runs/{id}/marks.
type markBody struct {
	StartS *float64 `json:"start_s"`
	EndS   *float64 `json:"end_s"`
	Label  string   `json:"label"`
}

// markJSON is one mark on the API: seconds from the run's first sample and
// the absolute times (RFC 3339, UTC).
type markJSON struct {
	N      int       `json:"n"`
	StartS num       `json:"start_s"`
	EndS   num       `json:"end_s"`
	Start  time.Time `json:"start"`
	End    time.Time `json:"end"`
	Label  string    `json:"label"`
}

type marksJSON struct {
	Run      uint64     `json:"run"`
	Editable bool       `json:"editable"`
	Reason   string     `json:"reason,omitempty"` // why not editable
	RunStart *time.Time `json:"run_start,omitempty"`
	Marks    []markJSON `json:"marks"`
}

// DecodeMarkBody reads one mark from a JSON body: start_s and end_s in
// seconds from the run's first sample (0 ≤ start_s < end_s, at most ten
// days), label optional (at most estimate.MaxMarkLabel bytes of UTF-8
// without control characters). Unknown fields and trailing data are
// refused. The error names the field to fix.
func DecodeMarkBody(r io.Reader) (start, end time.Duration, label string, err error) {
	dec := json.NewDecoder(io.LimitReader(r, maxMarkBody+1))
	dec.DisallowUnknownFields()
	var b markBody
	if err := dec.Decode(&b); err != nil {
		var ute *json.UnmarshalTypeError
		switch {
		case errors.As(err, &ute) && ute.Field == "label":
			return 0, 0, "", errors.New("label: must be a string")
		case errors.As(err, &ute) && ute.Field != "":
			return 0, 0, "", fmt.Errorf("%s: must be a number of seconds", ute.Field)
		case strings.HasPrefix(err.Error(), "json: unknown field"):
			return 0, 0, "", fmt.Errorf("body: %s (send start_s, end_s and label)", strings.TrimPrefix(err.Error(), "json: "))
		}
		return 0, 0, "", fmt.Errorf("body: not a JSON object {\"start_s\": …, \"end_s\": …, \"label\": …}: %v", err)
	}
	if dec.More() {
		return 0, 0, "", errors.New("body: one JSON object only")
	}
	if _, err := dec.Token(); err != io.EOF {
		return 0, 0, "", errors.New("body: one JSON object only")
	}
	const maxS = 10 * 24 * 3600 // ten days: longer than any run
	sec := func(name string, v *float64) (time.Duration, error) {
		switch {
		case v == nil:
			return 0, fmt.Errorf("%s: missing (seconds from the run's first sample)", name)
		case math.IsNaN(*v) || *v < 0 || *v > maxS:
			return 0, fmt.Errorf("%s: %g is out of range (0 to %d s from the run's first sample)", name, *v, maxS)
		}
		return time.Duration(math.Round(*v*1e6)) * time.Microsecond, nil
	}
	if start, err = sec("start_s", b.StartS); err != nil {
		return 0, 0, "", err
	}
	if end, err = sec("end_s", b.EndS); err != nil {
		return 0, 0, "", err
	}
	if end <= start {
		return 0, 0, "", fmt.Errorf("end_s: %g s is not after start_s %g s", *b.EndS, *b.StartS)
	}
	label = strings.TrimSpace(b.Label)
	switch {
	case len(label) > estimate.MaxMarkLabel:
		return 0, 0, "", fmt.Errorf("label: %d bytes, at most %d", len(label), estimate.MaxMarkLabel)
	case !utf8.ValidString(label) || strings.ContainsFunc(label, unicode.IsControl):
		return 0, 0, "", errors.New("label: control characters or invalid UTF-8")
	}
	return start, end, label, nil
}

// marksEditable says whether run id's marks may change now, and if not why.
func (s *Server) marksEditable(run storage.Run) (bool, string) {
	if s.marks == nil || s.apply == nil {
		return false, "marks are set on a stored database: stop the recording and run liftyard serve --db FILE, or use liftyard marks"
	}
	if cur := s.current.Load(); (cur != nil && cur.ID == run.ID) || run.Status == storage.StatusRecording {
		return false, fmt.Sprintf("run %d is recording: mark it after it has ended", run.ID)
	}
	if !viewOf(run.Kind).Marks {
		return false, fmt.Sprintf("run %d is a %s run: its results are blocks of fixed length, which marks do not set", run.ID, run.Kind)
	}
	return true, ""
}

func (s *Server) apiMarks(w http.ResponseWriter, r *http.Request) {
	id, err := runID(r)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	run, _, err := s.run(id)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	out, err := s.marksOf(run)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	writeJSONStatus(w, http.StatusOK, out)
}

// marksOf reads a run's marks for the API.
func (s *Server) marksOf(run storage.Run) (marksJSON, error) {
	out := marksJSON{Run: run.ID, Marks: []markJSON{}}
	out.Editable, out.Reason = s.marksEditable(run)
	marks, err := s.marks.Marks(run.ID)
	if err != nil {
		return out, fmt.Errorf("read marks of run %d: %w", run.ID, err)
	}
	t0, err := s.marks.RunStart(run.ID)
	if err != nil {
		// A run without raw samples cannot be marked or re-processed.
		if out.Editable {
			out.Editable, out.Reason = false, fmt.Sprintf("run %d cannot be marked: %v", run.ID, err)
		}
		t0 = time.Time{}
	} else {
		out.RunStart = &t0
	}
	for i, m := range marks {
		mj := markJSON{N: i + 1, StartS: num(math.NaN()), EndS: num(math.NaN()), Start: m.Start.UTC(), End: m.End.UTC(), Label: m.Label}
		if !t0.IsZero() {
			mj.StartS, mj.EndS = num(m.Start.Sub(t0).Seconds()), num(m.End.Sub(t0).Seconds())
		}
		out.Marks = append(out.Marks, mj)
	}
	return out, nil
}

// editMarks runs one state change on run id's marks: it checks that the
// run may be marked, serialises with other changes, and answers with the
// marks afterwards (plus what apply did).
func (s *Server) editMarks(w http.ResponseWriter, r *http.Request, change func(ms MarkStore, run storage.Run) (*MarksApplied, error)) {
	id, err := runID(r)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	ms := s.marks
	marksMu.Lock()
	defer marksMu.Unlock()
	run, _, err := s.run(id)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	if ok, why := s.marksEditable(run); !ok {
		status := http.StatusConflict
		if s.apply == nil {
			status = http.StatusMethodNotAllowed
		}
		writeJSONStatus(w, status, map[string]string{"error": why})
		return
	}
	applied, err := change(ms, run)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	out, err := s.marksOf(run)
	if err != nil {
		s.fail(w, r, err, true)
		return
	}
	if applied != nil {
		s.polars.forget(id)
		writeJSONStatus(w, http.StatusOK, struct {
			marksJSON
			Applied *MarksApplied `json:"applied"`
		}{out, applied})
		return
	}
	writeJSONStatus(w, http.StatusOK, out)
}

func (s *Server) addMark(w http.ResponseWriter, r *http.Request) {
	s.editMarks(w, r, func(ms MarkStore, run storage.Run) (*MarksApplied, error) {
		if ct, _, _ := mime.ParseMediaType(r.Header.Get("Content-Type")); ct != "application/json" {
			return nil, fmt.Errorf("%w: Content-Type: send application/json", errBadRequest)
		}
		body, err := io.ReadAll(http.MaxBytesReader(w, r.Body, maxMarkBody))
		if err != nil {
			return nil, fmt.Errorf("%w: body: larger than %d bytes", errBadRequest, maxMarkBody)
		}
		start, end, label, err := DecodeMarkBody(bytes.NewReader(body))
		if err != nil {
			return nil, fmt.Errorf("%w: %w", errBadRequest, err)
		}
		t0, err := ms.RunStart(run.ID)
		if err != nil {
			return nil, fmt.Errorf("first sample of run %d: %w", run.ID, err)
		}
		marks, err := ms.Marks(run.ID)
		if err != nil {
			return nil, err
		}
		m := estimate.Mark{Start: t0.Add(start), End: t0.Add(end), Label: label}
		i, _ := slices.BinarySearchFunc(marks, m, func(a, b estimate.Mark) int { return a.Start.Compare(b.Start) })
		marks = slices.Insert(marks, i, m)
		if err := estimate.CheckMarks(marks, 0); err != nil {
			return nil, fmt.Errorf("%w: start_s/end_s: %.3f–%.3f s overlaps a mark already set (%v)", errBadRequest,
				start.Seconds(), end.Seconds(), strings.TrimPrefix(err.Error(), estimate.ErrMarks.Error()+": "))
		}
		return nil, ms.PutMarks(run.ID, marks)
	})
}

func (s *Server) deleteMark(w http.ResponseWriter, r *http.Request) {
	s.editMarks(w, r, func(ms MarkStore, run storage.Run) (*MarksApplied, error) {
		marks, err := ms.Marks(run.ID)
		if err != nil {
			return nil, err
		}
		n, err := strconv.Atoi(r.PathValue("n"))
		if err != nil || n < 1 || n > len(marks) {
			return nil, fmt.Errorf("%w: mark %q: run %d has marks 1 to %d", errBadRequest, r.PathValue("n"), run.ID, len(marks))
		}
		return nil, ms.PutMarks(run.ID, slices.Delete(marks, n-1, n))
	})
}

func (s *Server) clearMarks(w http.ResponseWriter, r *http.Request) {
	s.editMarks(w, r, func(ms MarkStore, run storage.Run) (*MarksApplied, error) {
		return nil, ms.PutMarks(run.ID, nil)
	})
}

func (s *Server) applyMarks(w http.ResponseWriter, r *http.Request) {
	s.editMarks(w, r, func(ms MarkStore, run storage.Run) (*MarksApplied, error) {
		res, err := s.apply(r.Context(), run.ID)
		if err != nil {
			return nil, err
		}
		if res.Unused == nil {
			res.Unused = []int{}
		}
		return &res, nil
	})
}

package dashboard

import (
	"fmt"
	"net/http"
	"sync"

	"liftyard/estimate"
	"liftyard/report"
	"liftyard/rig"
	"liftyard/storage"
)

// The run page's plots are the report's (package report draws them with
// gonum/plot); the dashboard serves them as standalone SVG:
//
//	GET /runs/{id}/polar.svg   C_L against α (S for a rotor) with U95 bars (report.LiftPlotSVG)
//	GET /runs/{id}/zones.svg   net Cp per roof zone and block with U95 bars (report.ZonePlotSVG)
//	GET /runs/{id}/taps.svg    the roof's taps at their positions, coloured by mean net Cp (report.TapMapSVG)
//
// The kind's view (kinds.go) says which one a run page shows.

// polarCacheSize bounds the cached plots. Rendering one costs a few ms; a
// handful of recent runs covers people flicking between run pages.
const polarCacheSize = 32

// polarKey names one rendering: a plot of a run with a given number of
// segments. A new segment (or a re-processed run with a different count)
// renders anew.
type polarKey struct {
	plot     string
	run      uint64
	segments int
}

// polarCache keeps rendered SVGs. Safe for concurrent use.
type polarCache struct {
	mu    sync.Mutex
	svg   map[polarKey][]byte
	order []polarKey // oldest first
}

func newPolarCache() *polarCache { return &polarCache{svg: map[polarKey][]byte{}} }

func (c *polarCache) get(k polarKey) ([]byte, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	b, ok := c.svg[k]
	return b, ok
}

func (c *polarCache) put(k polarKey, b []byte) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if _, ok := c.svg[k]; ok {
		return
	}
	// Drop older renderings of the same plot of the run and the oldest entries.
	kept := c.order[:0]
	for _, o := range c.order {
		if o.run == k.run && o.plot == k.plot {
			delete(c.svg, o)
			continue
		}
		kept = append(kept, o)
	}
	c.order = kept
	for len(c.order) >= polarCacheSize {
		delete(c.svg, c.order[0])
		c.order = c.order[1:]
	}
	c.svg[k] = b
	c.order = append(c.order, k)
}

// forget drops the cached plots of a run whose segments were recomputed
// (the cache key holds only the segment count).
func (c *polarCache) forget(run uint64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	keep := c.order[:0]
	for _, k := range c.order {
		if k.run == run {
			delete(c.svg, k)
			continue
		}
		keep = append(keep, k)
	}
	c.order = keep
}

// plotSVG serves one of the report's plots of a run.
func (s *Server) plotSVG(name string, draw func(storage.Run, []estimate.Segment) ([]byte, error)) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		id, err := runID(r)
		if err != nil {
			s.fail(w, r, err, false)
			return
		}
		run, segs, err := s.runSegments(id)
		if err != nil {
			s.fail(w, r, err, false)
			return
		}
		k := polarKey{plot: name, run: id, segments: len(segs)}
		b, ok := s.polars.get(k)
		if !ok {
			if b, err = draw(run, segs); err != nil {
				s.fail(w, r, fmt.Errorf("%s of run %d: %w", name, id, err), false)
				return
			}
			s.polars.put(k, b)
		}
		w.Header().Set("Content-Type", "image/svg+xml")
		w.Header().Set("Cache-Control", "no-store")
		w.Write(b)
	}
}

// tapMapSVG draws the report's tap map from the rig file stored with the
// run (tap positions); a run without one, or whose rig no longer parses,
// gets the empty frame.
func tapMapSVG(run storage.Run, segs []estimate.Segment) ([]byte, error) {
	rg, err := rig.Parse("", []byte(run.RigTOML))
	if err != nil || run.RigTOML == "" {
		rg = nil
	}
	return report.TapMapSVG(run, rg, segs)
}

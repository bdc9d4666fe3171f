package dashboard

import (
	"bytes"
	"fmt"
	"math"
	"net/http"
	"strconv"
	"sync"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
)

// polarCacheSize bounds the cached plots. Rendering one costs a few ms; a
// handful of recent runs covers people flicking between run pages.
const polarCacheSize = 32

// polarKey names one rendering: a run with a given number of segments.
// A new segment (or a re-processed run with a different count) renders anew.
type polarKey struct {
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
	// Drop older renderings of the same run and the oldest entries.
	kept := c.order[:0]
	for _, o := range c.order {
		if o.run == k.run {
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

// clU95 is the polar points with their U95 as error bars (plotter needs one
// value that is both an XYer and a YErrorer).
type clU95 struct {
	plotter.XYs
	plotter.YErrors
}

// polarPlot draws C_L against α (or spin ratio for a rotor) with U95 error
// bars. Points whose C_L or abscissa is missing are left out and the caption
// says how many; a missing U95 draws the point without a bar.
func polarPlot(runID uint64, kind string, segs []segmentJSON) ([]byte, error) {
	p := plot.New()
	xLabel := "angle of attack α [°]"
	if kind == "rotor" {
		xLabel = "spin ratio S = ωR/V"
	}
	p.Title.Text = "Run " + strconv.FormatUint(runID, 10) + ": lift coefficient C_L with U95"
	p.Y.Label.Text = "C_L"
	p.Add(plotter.NewGrid())

	var pts clU95
	var bare plotter.XYs // points without a finite U95
	dropped := 0
	for _, s := range segs {
		xv := s.AlphaDeg
		if kind == "rotor" {
			xv = s.SpinRatio
		}
		if !finite(xv) || !finite(s.CL) {
			dropped++
			continue
		}
		if !finite(s.CLU95) {
			bare = append(bare, plotter.XY{X: float64(xv), Y: float64(s.CL)})
			continue
		}
		pts.XYs = append(pts.XYs, plotter.XY{X: float64(xv), Y: float64(s.CL)})
		u := float64(s.CLU95)
		pts.YErrors = append(pts.YErrors, struct{ Low, High float64 }{u, u})
	}
	switch {
	case len(pts.XYs)+len(bare) == 0:
		xLabel += " — no segments with C_L yet"
		p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, 1
	case dropped > 0:
		xLabel += fmt.Sprintf(" — %d segment(s) without C_L or abscissa not shown", dropped)
	}
	p.X.Label.Text = xLabel
	if len(pts.XYs)+len(bare) > 0 {
		padAxes(p, pts, bare)
	}
	if len(pts.XYs) > 0 {
		sc, err := plotter.NewScatter(pts)
		if err != nil {
			return nil, fmt.Errorf("polar points: %w", err)
		}
		eb, err := plotter.NewYErrorBars(pts)
		if err != nil {
			return nil, fmt.Errorf("polar error bars: %w", err)
		}
		p.Add(sc, eb)
		p.Legend.Add("segment mean, bars ± U95", sc)
	}
	if len(bare) > 0 {
		sc, err := plotter.NewScatter(bare)
		if err != nil {
			return nil, fmt.Errorf("polar points: %w", err)
		}
		p.Add(sc)
		p.Legend.Add("no U95", sc)
	}
	p.Legend.Top = true
	p.Legend.Left = true
	wt, err := p.WriterTo(7*vg.Inch, 4.5*vg.Inch, "svg")
	if err != nil {
		return nil, fmt.Errorf("polar svg: %w", err)
	}
	var buf bytes.Buffer
	if _, err := wt.WriteTo(&buf); err != nil {
		return nil, fmt.Errorf("polar svg: %w", err)
	}
	return buf.Bytes(), nil
}

func (s *Server) polarSVG(w http.ResponseWriter, r *http.Request) {
	id, err := runID(r)
	if err != nil {
		s.fail(w, r, err, false)
		return
	}
	run, segs, err := s.run(id)
	if err != nil {
		s.fail(w, r, err, false)
		return
	}
	k := polarKey{run: id, segments: len(segs)}
	b, ok := s.polars.get(k)
	if !ok {
		if b, err = polarPlot(id, run.Kind, segs); err != nil {
			s.fail(w, r, fmt.Errorf("run %d: %w", id, err), false)
			return
		}
		s.polars.put(k, b)
	}
	w.Header().Set("Content-Type", "image/svg+xml")
	w.Header().Set("Cache-Control", "no-store")
	w.Write(b)
}

// padAxes sets the axis ranges to the points and their bars plus a margin,
// so no point or bar sits on the frame.
func padAxes(p *plot.Plot, pts clU95, bare plotter.XYs) {
	xmin, xmax := math.Inf(1), math.Inf(-1)
	ymin, ymax := math.Inf(1), math.Inf(-1)
	for i, pt := range pts.XYs {
		xmin, xmax = min(xmin, pt.X), max(xmax, pt.X)
		ymin, ymax = min(ymin, pt.Y-pts.YErrors[i].Low), max(ymax, pt.Y+pts.YErrors[i].High)
	}
	for _, pt := range bare {
		xmin, xmax = min(xmin, pt.X), max(xmax, pt.X)
		ymin, ymax = min(ymin, pt.Y), max(ymax, pt.Y)
	}
	pad := func(lo, hi float64) (float64, float64) {
		m := 0.06 * (hi - lo)
		if m == 0 {
			m = 0.5 * max(math.Abs(lo), 1)
		}
		return lo - m, hi + m
	}
	p.X.Min, p.X.Max = pad(xmin, xmax)
	p.Y.Min, p.Y.Max = pad(ymin, ymax)
}

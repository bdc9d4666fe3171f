package report

import (
	"math"
	"sync"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
)

// The legend goes in the corner of the plot where the data are fewest, so
// it never hides points or curves (issue 13: legends overlapped data). The
// data each plot carries are noted as addPoints and addCurve draw them and
// looked at once, when the plot is rendered (its axis ranges final).
var (
	plotDataMu sync.Mutex
	plotData   = map[*plot.Plot][]plotter.XY{}
)

// noteData records xys as drawn on p.
func noteData(p *plot.Plot, xys plotter.XYs) {
	plotDataMu.Lock()
	plotData[p] = append(plotData[p], xys...)
	plotDataMu.Unlock()
}

// legendCorner is the share of the plot area, from each side, that a
// corner covers when its data are counted.
const legendCorner = 0.45

// placeLegend puts p's legend in the corner (top left, top right, bottom
// left, bottom right, in that order of preference on ties) holding the
// fewest of its data points, and forgets p's data.
func placeLegend(p *plot.Plot) {
	plotDataMu.Lock()
	xys := plotData[p]
	delete(plotData, p)
	plotDataMu.Unlock()
	if len(xys) == 0 {
		return
	}
	dx, dy := p.X.Max-p.X.Min, p.Y.Max-p.Y.Min
	if !(dx > 0) || !(dy > 0) {
		return
	}
	type corner struct{ top, left bool }
	corners := []corner{{true, true}, {true, false}, {false, true}, {false, false}}
	count := make([]int, len(corners))
	for _, xy := range xys {
		x, y := (xy.X-p.X.Min)/dx, (xy.Y-p.Y.Min)/dy
		if math.IsNaN(x) || math.IsNaN(y) {
			continue
		}
		for i, c := range corners {
			inX := (c.left && x <= legendCorner) || (!c.left && x >= 1-legendCorner)
			inY := (c.top && y >= 1-legendCorner) || (!c.top && y <= legendCorner)
			if inX && inY {
				count[i]++
			}
		}
	}
	best := 0
	for i := range corners {
		if count[i] < count[best] {
			best = i
		}
	}
	p.Legend.Top, p.Legend.Left = corners[best].top, corners[best].left
}

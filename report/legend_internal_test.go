package report

import (
	"testing"

	"gonum.org/v1/plot/plotter"
)

// Ensure that the legend goes to the corner with the fewest data points
// (issue 13: legends overlapped data), top left when it is free.
func TestPlaceLegend(t *testing.T) {
	for _, tc := range []struct {
		name      string
		xys       plotter.XYs
		top, left bool
	}{
		{"rising line: top left is free", plotter.XYs{{X: 0, Y: 0}, {X: 5, Y: 5}, {X: 10, Y: 10}}, true, true},
		{"falling line: top right is free", plotter.XYs{{X: 0, Y: 10}, {X: 5, Y: 5}, {X: 10, Y: 0}}, true, false},
		{"data across the top: a bottom corner", plotter.XYs{{X: 0, Y: 10}, {X: 3, Y: 9}, {X: 7, Y: 9}, {X: 10, Y: 10}, {X: 9, Y: 1}}, false, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := newPlot("t", "x", "y")
			p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 10, 0, 10
			noteData(p, tc.xys)
			placeLegend(p)
			if p.Legend.Top != tc.top || p.Legend.Left != tc.left {
				t.Errorf("legend top=%v left=%v, want top=%v left=%v", p.Legend.Top, p.Legend.Left, tc.top, tc.left)
			}
			plotDataMu.Lock()
			_, kept := plotData[p]
			plotDataMu.Unlock()
			if kept {
				t.Error("the plot's data are forgotten once placed")
			}
		})
	}
}

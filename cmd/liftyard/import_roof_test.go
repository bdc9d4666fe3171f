package main

import (
	"bytes"
	"math"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"

	"liftyard/calibrate"
	"liftyard/estimate"
)

// Ensure that import and reprocess summarise a roof run in the roof's own
// terms — blocks, zones, net Cp and block peaks — and not with the lift
// curve of a foil (issue 11: "96 steady segments … no lift-curve fit").
func TestPrintRoofSummary(t *testing.T) {
	segs := []estimate.Segment{
		{Zone: "corner", Block: 0, CpMean: calibrate.Value{X: -1.2049, U: 0.05, Dof: math.Inf(1)}, CpPeak: -2.5, CpPeakU: 0.1, DirectionRad: math.NaN()},
		{Zone: "corner", Tap: "t1", Block: 0, CpMean: calibrate.Value{X: -1.3}},
		{Zone: "corner", Block: 1, CpMean: calibrate.Value{X: -1.1, U: 0.05, Dof: math.Inf(1)}, CpPeak: -2.4, CpPeakU: 0.1, DirectionRad: math.NaN(), SamplesUnblocked: 37},
	}
	var b bytes.Buffer
	printRoofSummary(&b, segs)
	out := b.String()
	assert.Contains(t, out, "2 blocks")
	assert.Contains(t, out, "block 0 corner   net Cp −1.205 ± 0.098, block peak −2.50 ± 0.20 (q at mast)")
	assert.Contains(t, out, "37 samples fell in no block")
	assert.Contains(t, out, "not a design approval")
	assert.NotContains(t, out, "t1", "per-tap rows stay in the export")
	assert.NotContains(t, out, "lift", "no foil lines")
	assert.Equal(t, 5, strings.Count(out, "\n"))
}

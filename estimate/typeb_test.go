package estimate_test

import (
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/estimate"
)

// Ensure that the budget shows each Type B input of issue 10 on its own
// line: the span of the normal cells (u = URel·|N̄|) and of the pitot
// (u = URel·q̄), and the pitot coefficient (u = 2·u(C)/C·q̄), each entering
// C_L with its sensitivity (c = C_L/N̄·… for a span of N at α = 0: u(C_L) =
// URel·C_L; for q: u(C_L) = URel·C_L).
func TestReduce_SpanAndPitotCoefficientLines(t *testing.T) {
	n := 200
	w := estimate.Window{NormalN: make([]float64, n), QPa: make([]float64, n), AlphaRad: make([]float64, n),
		AreaM2: 0.05, NormalSpanURel: 0.01, QSpanURel: 0.02, QCoeffURel: 0.004}
	for i := range n {
		w.NormalN[i], w.QPa[i] = 2+0.001*float64(i%3), 74+0.01*float64(i%5)
	}
	p, err := estimate.Reduce(&w)
	require.NoError(t, err)
	lines := map[string]float64{}
	for _, c := range p.CLBudget {
		lines[c.Input] = c.UY
	}
	cl := p.CL.X
	assert.InEpsilon(t, 0.01*cl, lines["normal force span"], 1e-9)
	assert.InEpsilon(t, 0.02*cl, lines["dynamic pressure span"], 1e-9)
	assert.InEpsilon(t, 0.004*cl, lines["pitot coefficient"], 1e-9)
	assert.NotContains(t, lines, "axial force span", "no axial span declared")
}

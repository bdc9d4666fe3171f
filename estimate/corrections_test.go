package estimate_test

import (
	"math"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/estimate"
)

// steadyWindow is a window of n samples alternating ±δ about the given
// means (so the means are exact), at α = 0.
func steadyWindow(n int, normalN, axialN, qPa, areaM2 float64) estimate.Window {
	w := estimate.Window{AreaM2: areaM2, NormalUN: 0.05, AxialUN: 0.02, QUPa: 0.5}
	for i := range n {
		s := float64(1 - 2*(i%2))
		w.NormalN = append(w.NormalN, normalN+0.01*s)
		w.AxialN = append(w.AxialN, axialN+0.002*s)
		w.QPa = append(w.QPa, qPa+0.1*s)
		w.AlphaRad = append(w.AlphaRad, 0)
	}
	return w
}

// Ensure that the blockage correction gives the value computed by hand from
// the closed-section formulas (docs/references.md §16; Barlow, Rae & Pope
// 1999 ch. 10, equations from memory, so the check is of our arithmetic on
// the stated formulas): C = 1.5 m², V = 0.004 m³, K = 0.90, S = 0.3 m²,
// C_D,u = 0.05, C_L,u = 0.6, q_u = 200 Pa:
//
//	ε_sb = 0.90·0.004/1.5^1.5 = 0.001 959 59
//	ε_wb = 0.3/(4·1.5)·0.05   = 0.002 5
//	(1 + ε)² = 1.008 939 07
//	C_L,c = 0.594 684 08, C_D,c = 0.049 557 006, q_c = 201.787 81 Pa
func TestReduce_BlockageHandValue(t *testing.T) {
	w := steadyWindow(200, 36, 3, 200, 0.3) // C_L,u = 36/(200·0.3) = 0.6, C_D,u = 3/60 = 0.05
	plain, err := estimate.Reduce(&w)
	require.NoError(t, err)
	require.InDelta(t, 0.6, plain.CL.X, 1e-12)
	require.InDelta(t, 0.05, plain.CD.X, 1e-12)

	w.Blockage = &estimate.Blockage{SolidEpsFrac: 0.90 * 0.004 / math.Pow(1.5, 1.5), Wake: true, SectionAreaM2: 1.5, UFrac: 0.25}
	p, err := estimate.Reduce(&w)
	require.NoError(t, err)
	assert.InDelta(t, 0.59468408, p.CL.X, 1e-8)
	assert.InDelta(t, 0.049557006, p.CD.X, 1e-9)
	assert.InDelta(t, 201.78781, p.QPa.X, 1e-5)
	assert.InDelta(t, plain.LiftN.X, p.LiftN.X, 0, "loads are not corrected")
	// Identity: C_L·q is unchanged by the correction (L/S).
	assert.InDelta(t, plain.CL.X*plain.QPa.X, p.CL.X*p.QPa.X, 1e-9)

	// Its own budget line: u(ε) = 0.25·ε, sensitivity −2·C_L,c/(1 + ε).
	eps := 0.0044595918
	var line *estimate.Contribution
	for i, c := range p.CLBudget {
		if strings.HasPrefix(c.Input, "blockage") {
			line = &p.CLBudget[i]
		}
	}
	require.NotNil(t, line, "blockage line in the C_L budget")
	assert.InDelta(t, 0.25*eps, line.U, 1e-10)
	assert.InDelta(t, -2*p.CL.X/(1+eps), line.Sensitivity, 1e-8)
	assert.Greater(t, p.CL.U, plain.CL.U/1.009, "the correction adds uncertainty")
}

// Ensure that without wake blockage and without a volume the correction
// changes nothing, and that a window with no flow is left alone.
func TestReduce_BlockageNone(t *testing.T) {
	w := steadyWindow(50, 36, 3, 200, 0.3)
	plain, err := estimate.Reduce(&w)
	require.NoError(t, err)
	w.Blockage = &estimate.Blockage{SectionAreaM2: 1.5, UFrac: 0.25}
	p, err := estimate.Reduce(&w)
	require.NoError(t, err)
	assert.Equal(t, plain.CL, p.CL)
	assert.Equal(t, plain.CLBudget, p.CLBudget)

	off := steadyWindow(50, 0, 0, 0, 0.3)
	off.Blockage = &estimate.Blockage{SolidEpsFrac: 0.01, Wake: true, SectionAreaM2: 1.5, UFrac: 0.25}
	q, err := estimate.Reduce(&off)
	require.NoError(t, err)
	assert.True(t, math.IsNaN(q.CL.X), "no flow: no coefficients to correct")
}

// Ensure that the weight tare and balance matrix inputs give their own
// lines in the C_L budget with the sensitivities of the normal and axial
// force, and add to u(C_L) in quadrature.
func TestReduce_CorrectionLines(t *testing.T) {
	w := steadyWindow(100, 36, 3, 200, 0.3)
	plain, err := estimate.Reduce(&w)
	require.NoError(t, err)
	w.Corrections = []estimate.CorrectionInput{{Name: "weight tare", NormalUN: 0.3, AxialUN: 0.1}}
	p, err := estimate.Reduce(&w)
	require.NoError(t, err)
	var got []string
	for _, c := range p.CLBudget {
		if strings.HasPrefix(c.Input, "weight tare") {
			got = append(got, c.Input)
			if strings.Contains(c.Input, "normal") {
				assert.InDelta(t, 0.3/60, c.UY, 1e-12, "c_N = cos α/(qS) at α = 0")
			}
		}
	}
	assert.Equal(t, []string{"weight tare (normal force)", "weight tare (axial force)"}, got)
	// At α = 0 the axial force has no lift sensitivity: its line is zero.
	assert.InDelta(t, math.Hypot(plain.CL.U, 0.3/60), p.CL.U, 1e-12)
}

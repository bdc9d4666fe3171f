package main

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	"gonum.org/v1/gonum/mat"

	"liftyard/rig"
)

// Ensure that `liftyard balance` fits the interaction matrix of simulated
// bench loadings — outputs o = X·f plus a no-load offset and noise — and
// prints a [balance] table that parses with the rig file and holds X⁻¹.
func TestBalance_PrintsRigTable(t *testing.T) {
	x := mat.NewDense(3, 3, []float64{1.04, 0.03, 0.10, 0.02, 0.97, -0.06, 0.05, 0.04, 1.02}) // invented cross-talk
	offset := []float64{0.3, -0.2, 0.1}                                                       // no-load reading, kgf
	rng := rand.New(rand.NewPCG(8, 8))
	var csv strings.Builder
	csv.WriteString("# invented bench loadings of a three-cell balance, kgf\napplied_n_fore,applied_n_aft,applied_axial,n_fore,n_aft,axial\n")
	loads := [][]float64{{0, 0, 0}, {0, 0, 0}}
	for _, a := range []float64{0, 5, 10} {
		for _, b := range []float64{0, 5, 10} {
			for _, c := range []float64{-4, 4} {
				loads = append(loads, []float64{a, b, c})
			}
		}
	}
	for _, f := range loads {
		var o mat.VecDense
		o.MulVec(x, mat.NewVecDense(3, f))
		fmt.Fprintf(&csv, "%g,%g,%g", f[0], f[1], f[2])
		for j := range 3 {
			fmt.Fprintf(&csv, ",%.5f", o.AtVec(j)+offset[j]+0.002*rng.NormFloat64())
		}
		csv.WriteString("\n")
	}
	dir := t.TempDir()
	pts := filepath.Join(dir, "loads.csv")
	require.NoError(t, os.WriteFile(pts, []byte(csv.String()), 0o644))
	rigPath := filepath.Join(dir, "rig.toml")
	require.NoError(t, os.WriteFile(rigPath, []byte(tareRigTOML), 0o644))

	var out, errb bytes.Buffer
	code := run(t.Context(), []string{"balance", "--rig", rigPath, "--points", pts}, &out, &errb)
	require.Equal(t, 0, code, "stderr: %s", errb.String())
	assert.Contains(t, errb.String(), "no-load reading subtracted")
	r, err := rig.Parse("with-balance.toml", []byte(tareRigTOML+"\n"+out.String()))
	require.NoError(t, err, "the printed table parses:\n%s", out.String())
	require.NotNil(t, r.Balance)
	var inv mat.Dense
	require.NoError(t, inv.Inverse(x))
	for k := range 3 {
		for j := range 3 {
			assert.InDelta(t, inv.At(k, j), r.Balance.Matrix[k][j], 5e-4, "C[%d][%d]", k, j)
		}
		assert.Less(t, r.Balance.U[k], 0.01, "u of component %d", k)
	}

	require.NoError(t, os.WriteFile(pts, []byte("n_fore,n_aft,axial\n1,2,3\n"), 0o644))
	errb.Reset()
	code = run(t.Context(), []string{"balance", "--rig", rigPath, "--points", pts}, &out, &errb)
	assert.Equal(t, 2, code, "a loadings file without applied columns is bad input")
	assert.Contains(t, errb.String(), "loads.csv:1: no column applied_n_fore")
}

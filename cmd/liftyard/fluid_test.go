package main

import (
	"encoding/json"
	"flag"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// updateGolden rewrites the golden files of this package's CLI output tests
// (go test ./cmd/liftyard -update).
var updateGolden = flag.Bool("update", false, "rewrite golden files in testdata/")

// Ensure the field calculator against published values, through run():
// moist air by CIPM-2007 at 20 °C, 101 325 Pa, 50 % is 1.199 314 kg/m³
// (docs/references.md §2.3 [R], recomputed from Picard et al., Metrologia 45
// (2008) Appendix A1; the issue asks for 1e-4, the recomputation allows
// 2e-6); Sutherland μ at 20 °C is 1.813 41e-5 Pa·s (US Standard Atmosphere
// 1976 eq. 51, docs/references.md §3 [R]); fresh water at 20 °C is 998.2072
// kg/m³, ν 1.0034e-6 m²/s (ITTC 7.5-02-01-03 Rev 02 (2011) Table 1,
// docs/references.md §4 [C]) and standard seawater at 15 °C and one
// atmosphere 1025.9760 kg/m³, ν 1.18925e-6 m²/s (TEOS-10 gsw_rho_t_exact at
// sea pressure 0, GSW-Python 3.6.16, and the ITTC Table 3 ν on that density
// basis, docs/references.md §4.2 [R]; ITTC Table 3 itself is at two
// atmospheres).
func TestFluid_PublishedValues(t *testing.T) {
	for _, c := range []struct {
		name         string
		args         []string
		rho, rhoTol  float64
		mu, nu       float64
		muTol, nuTol float64
	}{
		{"air CIPM-2007 20 °C 50 %", []string{"--fluid", "air", "--temperature-c", "20", "--pressure-pa", "101325", "--humidity-pct", "50"},
			1.199314, 2e-6, 1.81341e-5, math.NaN(), 1e-9, 0},
		{"fresh water 20 °C", []string{"--fluid", "fresh_water", "--temperature-c", "20"},
			998.2072, 1e-4, math.NaN(), 1.0034e-6, 0, 5e-11},
		{"sea water 15 °C", []string{"--fluid", "sea_water", "--temperature-c", "15"},
			1025.9760, 1e-4, math.NaN(), 1.18925e-6, 0, 1e-10},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, out, errOut := runCLI(t, append(append([]string{"fluid"}, c.args...), "--json")...)
			require.Equal(t, 0, code, errOut)
			var got fluidResult
			require.NoError(t, json.Unmarshal([]byte(out), &got))
			if math.Abs(got.RhoKgM3-c.rho) > c.rhoTol {
				t.Errorf("rho_kg_m3 = %.7f, want %.7f ± %g", got.RhoKgM3, c.rho, c.rhoTol)
			}
			if !math.IsNaN(c.mu) && math.Abs(got.MuPaS-c.mu) > c.muTol {
				t.Errorf("mu_pa_s = %.6g, want %.6g", got.MuPaS, c.mu)
			}
			if !math.IsNaN(c.nu) && math.Abs(got.NuM2S-c.nu) > c.nuTol {
				t.Errorf("nu_m2_s = %.6g, want %.6g", got.NuM2S, c.nu)
			}
			if math.Abs(got.NuM2S-got.MuPaS/got.RhoKgM3) > 1e-18 || got.Method == "" {
				t.Errorf("nu %g ≠ mu/rho or no method: %+v", got.NuM2S, got)
			}
		})
	}
}

// Ensure the text output for people (golden: testdata/fluid/air.golden).
func TestFluid_TextGolden(t *testing.T) {
	code, out, errOut := runCLI(t, "fluid", "--fluid", "air", "--temperature-c", "20", "--pressure-pa", "101325", "--humidity-pct", "50")
	require.Equal(t, 0, code, errOut)
	path := filepath.Join("testdata", "fluid", "air.golden")
	if *updateGolden {
		require.NoError(t, os.WriteFile(path, []byte(out), 0o644))
	}
	want, err := os.ReadFile(path)
	require.NoError(t, err)
	require.Equal(t, string(want), out)
}

// Ensure bad usage exits 2 with a message that says what to fix.
func TestFluid_BadUsage(t *testing.T) {
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"no fluid", nil, "--fluid is required"},
		{"unknown fluid", []string{"--fluid", "oil"}, `--fluid "oil": want air, fresh_water or sea_water`},
		{"too hot water", []string{"--fluid", "fresh_water", "--temperature-c", "60"}, "need 0–40 °C"},
		{"humidity in water", []string{"--fluid", "sea_water", "--humidity-pct", "50"}, "--humidity-pct applies to air only"},
		{"salinity in air", []string{"--fluid", "air", "--salinity-g-per-kg", "35"}, "applies to sea_water only"},
		{"humidity over 100", []string{"--fluid", "air", "--humidity-pct", "120"}, "relative humidity 1.2"},
		{"not a number", []string{"--fluid", "air", "--temperature-c", "warm"}, "invalid value"},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, _, errOut := runCLI(t, append([]string{"fluid"}, c.args...)...)
			if code != 2 || !strings.Contains(errOut, c.want) {
				t.Errorf("exit %d, stderr %q; want 2 and %q", code, errOut, c.want)
			}
		})
	}
}

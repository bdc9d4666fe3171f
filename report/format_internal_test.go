package report

import (
	"math"
	"testing"
)

// Ensure that "value ± U" shows U to two significant digits and the value to
// the same decimal place (JCGM 100:2008 §7.2.6: U "to at most two
// significant digits"; rounding the value to the last digit of U is common
// practice, e.g. the GUM's own §7.2.2 example quotes 100.021 47 g with
// u_c = 0.35 mg, both ending at the same place).
func TestPM_TwoSignificantDigits(t *testing.T) {
	for _, c := range []struct {
		name     string
		v, u     float64
		fallback int
		want     string
	}{
		{"GUM §7.2.2 example (u_c = 0.35 mg on 100.021 47 g)", 100.02147, 0.00035, 3, "100.02147 ± 0.00035"},
		{"lift slope", 4.18367, 0.0712, 3, "4.184 ± 0.071"},
		{"rounding of U carries to the next power", 0.5, 0.0996, 3, "0.50 ± 0.10"},
		{"U with a leading 1", 2.0123, 0.0149, 3, "2.012 ± 0.015"},
		{"negative value, minus sign", -0.28812, 0.02271, 3, "−0.288 ± 0.023"},
		{"large U rounds to tens", 1234.5, 123.4, 1, "1230 ± 120"},
		{"no U: fallback decimals", 0.12345, math.NaN(), 3, "0.123"},
		{"zero U: fallback decimals", 0.12345, 0, 2, "0.12"},
		{"missing value", math.NaN(), 0.1, 3, "—"},
		{"no negative zero", -0.00004, 0.0023, 3, "0.0000 ± 0.0023"},
	} {
		t.Run(c.name, func(t *testing.T) {
			if got := pm(c.v, c.u, c.fallback); got != c.want {
				t.Errorf("pm(%g, %g) = %q, want %q", c.v, c.u, got, c.want)
			}
		})
	}
}

// Ensure that sig writes large and small numbers readably.
func TestSig(t *testing.T) {
	for _, c := range []struct {
		v    float64
		n    int
		want string
	}{
		{257000, 2, "2.6×10⁵"},
		{99960, 3, "1.00×10⁵"},
		{0.0003, 2, "3.0×10⁻⁴"},
		{0.0117, 2, "0.012"},
		{2.04, 3, "2.04"},
		{0, 2, "0"},
		{math.Inf(1), 2, "—"},
	} {
		if got := sig(c.v, c.n); got != c.want {
			t.Errorf("sig(%g, %d) = %q, want %q", c.v, c.n, got, c.want)
		}
	}
}

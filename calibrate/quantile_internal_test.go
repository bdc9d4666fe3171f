package calibrate

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// sortedQuantile is quantile by sorting a copy: the plain way the selection
// is checked against.
func sortedQuantile(v []float64, p float64) float64 {
	s := slices.Clone(v)
	slices.Sort(s)
	h := p * float64(len(s)-1)
	lo := int(math.Floor(h))
	if lo >= len(s)-1 {
		return s[len(s)-1]
	}
	return s[lo] + (h-float64(lo))*(s[lo+1]-s[lo])
}

// Ensure that quantile by selection gives what sorting gives, bit for bit,
// for short and long inputs, many ties, sorted and reversed runs, every p
// the zero watch uses and then some, and leaves its input as it was.
func TestQuantile_SelectionEqualsSort(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := range 3000 {
		n := 1 + rng.IntN(400)
		v := make([]float64, n)
		for i := range v {
			switch trial % 4 {
			case 0:
				v[i] = rng.NormFloat64()
			case 1:
				v[i] = float64(rng.IntN(5)) // ties
			case 2:
				v[i] = float64(i) // sorted
			default:
				v[i] = float64(n - i) // reversed
			}
		}
		orig := slices.Clone(v)
		for _, p := range []float64{0, 0.05, 0.25, 0.5, 0.9, 0.95, 1, rng.Float64()} {
			got, want := quantile(v, p), sortedQuantile(v, p)
			if math.Float64bits(got) != math.Float64bits(want) {
				t.Fatalf("trial %d n %d p %g: %v, sorting gives %v", trial, n, p, got, want)
			}
		}
		if !slices.Equal(v, orig) {
			t.Fatal("quantile changed its input")
		}
	}
	if q := quantile([]float64{math.NaN(), 1, 2}, 0.5); math.Float64bits(q) != math.Float64bits(sortedQuantile([]float64{math.NaN(), 1, 2}, 0.5)) {
		t.Errorf("with a NaN: %v", q)
	}
	if q := quantile(nil, 0.5); !math.IsNaN(q) {
		t.Errorf("no values: %v, want NaN", q)
	}
}

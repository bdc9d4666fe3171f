package estimate

import (
	"math"
	"math/rand/v2"
	"testing"
)

// Ensure that the four-lag autocovariance gives, bit for bit, the sums one
// lag at a time gives (Σ d_i·d_{i+k} in order of i), for every lag of
// short and long series, up to and past the series' end.
func TestAutocov4_EqualsOneLagAtATime(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, n := range []int{1, 2, 3, 4, 5, 7, 64, 1000, 4096} {
		d := make([]float64, n)
		ar := 0.0
		for i := range d {
			ar = 0.95*ar + rng.NormFloat64() // correlated, as sampled turbulence is
			d[i] = ar
		}
		for k := 0; k < n+3; k++ {
			var got [4]float64
			autocov4(d, k, &got)
			for j := range got {
				want := 0.0
				for i := 0; i+k+j < n; i++ {
					want += d[i] * d[i+k+j]
				}
				if math.Float64bits(got[j]) != math.Float64bits(want) {
					t.Fatalf("n %d lag %d: %v, one lag at a time %v", n, k+j, got[j], want)
				}
			}
		}
	}
}

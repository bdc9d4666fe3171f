package dashboard_test

import (
	"encoding/json"
	"math"
	"testing"

	"liftyard/dashboard"
	"liftyard/estimate"
)

// Ensure that the Froude number reaches the segment and live JSON as fn,
// and is null where estimate leaves it at 0 (air rigs: no free surface).
func TestJSON_Froude(t *testing.T) {
	for _, c := range []struct {
		name string
		fn   float64
		want any
	}{
		{"water", 1.649, 1.649},
		{"air", 0, nil},
	} {
		t.Run(c.name, func(t *testing.T) {
			var seg, live map[string]any
			if err := json.Unmarshal(dashboard.EncodeSegment(1, estimate.Segment{Fn: c.fn, En: math.NaN()}), &seg); err != nil {
				t.Fatal(err)
			}
			if err := json.Unmarshal(dashboard.EncodeLive(estimate.Live{Fn: c.fn}), &live); err != nil {
				t.Fatal(err)
			}
			if seg["fn"] != c.want || live["fn"] != c.want {
				t.Errorf("segment fn %v, live fn %v; want %v", seg["fn"], live["fn"], c.want)
			}
		})
	}
}

package calibrate

import "time"

// Point is one calibration point: a known applied value (from a reference
// standard: dead weights, a reference manometer) and the mean raw reading of
// the channel under it.
type Point struct {
	Applied   float64   `json:"applied"`             // applied reference value, in the record's Unit
	Reading   float64   `json:"reading"`             // mean raw reading (counts, mV, ...)
	Direction Direction `json:"direction,omitempty"` // loading (up) or unloading (down); empty when not stated
}

// Direction says whether a point was taken while loading or unloading.
type Direction string

// Directions of a calibration point.
const (
	Up   Direction = "up"   // while loading
	Down Direction = "down" // while unloading
)

// Record is one stored calibration of one channel: who made it, against
// which reference, the points, the fit and how long it is valid. Records are
// kept as a history; a rig file names one by ID.
type Record struct {
	ID         string    `json:"id"`      // e.g. "n_fore-20261201-1"; unique in a store
	Channel    string    `json:"channel"` // channel it calibrates
	Unit       string    `json:"unit"`    // unit of Applied and of the fitted values, as in the rig file ("N", "Pa")
	Created    time.Time `json:"created"`
	Who        string    `json:"who,omitempty"`
	Reference  string    `json:"reference,omitempty"` // the reference standard, e.g. "M1 dead weights, cert. 4711"
	ReferenceU float64   `json:"reference_u"`         // standard uncertainty of the applied values, in Unit
	// SpanURel is the relative standard uncertainty of the span (a span
	// error scales with the value: u = SpanURel·|value|), e.g. from the
	// reference standard's certificate stated in % of reading. Records
	// written before it existed read 0 (no span term).
	SpanURel   float64   `json:"span_u_rel,omitempty"`
	ValidUntil time.Time `json:"valid_until,omitzero"`
	Note       string    `json:"note,omitempty"`
	Points     []Point   `json:"points"`
	Fit        Fit       `json:"fit"`
}

// Fit is a least-squares polynomial from reading to value, with what is
// needed to state the uncertainty of a value calibrated by it.
type Fit struct {
	Order      int         `json:"order"`
	Poly       []float64   `json:"poly"`        // c0, c1, ... ascending powers: value = Σ c_k·reading^k, in Unit
	PolyU      []float64   `json:"poly_u"`      // standard uncertainties of the coefficients
	Cov        [][]float64 `json:"cov"`         // covariance matrix of the coefficients
	ResidualSD float64     `json:"residual_sd"` // residual standard deviation s = √(SSR/ν), in Unit
	Dof        int         `json:"dof"`         // ν = points − (order + 1)
	// NonlinearityPctFS is the largest deviation of the loading readings from
	// the straight line through the lowest and highest loading points, in %
	// of the loading reading span (docs/design.md §3.1).
	NonlinearityPctFS float64 `json:"nonlinearity_pct_fs"`
	// HysteresisPctFS is the largest |down − up| reading at the same applied
	// value, in % of the loading reading span; 0 without unloading points.
	HysteresisPctFS float64  `json:"hysteresis_pct_fs"`
	Warnings        []string `json:"warnings,omitempty"` // e.g. "order 3 not justified by the data (F-test, p = 0.41)"
}

// Expired reports whether the record's validity has ended at t.
func (r Record) Expired(t time.Time) bool { return !r.ValidUntil.IsZero() && t.After(r.ValidUntil) }

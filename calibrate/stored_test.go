package calibrate_test

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/rig"
)

// foreCellRecord fits the invented fore-cell example (24-bit counts, N) and
// returns it as a stored record.
func foreCellRecord(t *testing.T, unit string) calibrate.Record {
	t.Helper()
	f, err := os.Open("../testdata/calibration/fore-cell.csv")
	require.NoError(t, err)
	defer f.Close()
	pts, err := calibrate.ReadPoints(f)
	require.NoError(t, err)
	fit, err := calibrate.FitPoly(pts, 2)
	require.NoError(t, err)
	return calibrate.Record{ID: "n_fore-20261201-1", Channel: "n_fore", Unit: unit, ReferenceU: 0.01, Points: pts, Fit: fit}
}

func lookupOf(recs ...calibrate.Record) calibrate.Lookup {
	return func(id string) (calibrate.Record, error) {
		for _, r := range recs {
			if r.ID == id {
				return r, nil
			}
		}
		return calibrate.Record{}, errors.New("not found")
	}
}

// Ensure that a channel naming a stored calibration gets the record's
// polynomial, the largest uncertainty over the calibrated range with its
// Welch–Satterthwaite degrees of freedom, and that the calibrator says
// which record produced the values.
func TestNewCalibratorFrom_StoredID(t *testing.T) {
	rec := foreCellRecord(t, "N")
	r := &rig.Rig{Channels: []rig.Channel{
		{Name: "n_fore", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1}, Calibration: rig.Calibration{ID: rec.ID}},
		{Name: "pitot", Quantity: rig.QuantityPressure, Unit: "Pa", ToSI: rig.Affine{Scale: 1}, Calibration: rig.Calibration{Poly: []float64{0, 2}, U: 0.5}},
	}}
	c, err := calibrate.NewCalibratorFrom(r, lookupOf(rec))
	require.NoError(t, err)
	assert.Equal(t, rec.ID, c.StoredID("n_fore"))
	assert.Equal(t, "", c.StoredID("pitot"))
	require.Len(t, c.Stored(), 1)
	assert.Equal(t, rec.ID, c.Stored()[0].ID)

	raw := []float64{12480, 4095500, 8140474.4}
	out := c.Apply(&acquire.Block{Source: "s", Series: []acquire.Series{{Channel: "n_fore", Raw: raw}, {Channel: "pitot", Raw: []float64{1, 2, 3}}}})
	s := out.Find("n_fore")
	require.NotNil(t, s)
	for i, x := range raw {
		assert.InDelta(t, rec.Apply(x).X, s.Values[i], 1e-12*200)
	}
	// s.U is the largest u over the calibrated range: no reading between
	// the lowest and highest point has a larger one (dense check), and it
	// is attained (a finer search finds at most a hair more).
	lo, hi := rec.Points[0].Reading, rec.Points[4].Reading
	var best calibrate.Value
	for i := 0; i <= 5000; i++ {
		v := rec.Apply(lo + (hi-lo)*float64(i)/5000)
		if v.U > best.U {
			best = v
		}
	}
	assert.LessOrEqual(t, s.U, best.U*(1+1e-12))
	assert.InDelta(t, best.U, s.U, 1e-3*best.U)
	assert.InDelta(t, best.Dof, s.Dof, 1e-2*best.Dof)
	mid := rec.Apply(4095500)
	assert.Greater(t, s.U, mid.U, "the largest u over the range exceeds the mid-range u")
	assert.Greater(t, s.U, rec.ReferenceU, "u includes the reference standard")
	assert.Equal(t, 0.5*2, out.Find("pitot").U*2) // inline channels keep their u
	assert.True(t, math.IsInf(out.Find("pitot").Dof, 1))
}

// Ensure that a record made in kgf serves a channel declared in N: the
// record's own unit converts its values to SI (1 kgf = 9.80665 N, CGPM 1901
// standard gravity).
func TestNewCalibratorFrom_RecordUnit(t *testing.T) {
	rec := foreCellRecord(t, "kgf")
	r := &rig.Rig{Channels: []rig.Channel{
		{Name: "n_fore", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1}, Calibration: rig.Calibration{ID: rec.ID}},
	}}
	c, err := calibrate.NewCalibratorFrom(r, lookupOf(rec))
	require.NoError(t, err)
	out := c.Apply(&acquire.Block{Series: []acquire.Series{{Channel: "n_fore", Raw: []float64{4095500}}}})
	assert.InDelta(t, 9.80665*rec.Apply(4095500).X, out.Series[0].Values[0], 1e-9)
}

// Ensure that ids are refused with a message that says what to fix: no
// store, an unknown id, a record of another channel, a unit of another
// quantity.
func TestNewCalibratorFrom_Refused(t *testing.T) {
	rec := foreCellRecord(t, "N")
	other := rec
	other.ID, other.Channel = "n_aft-20261201-1", "n_aft"
	wrongUnit := rec
	wrongUnit.ID, wrongUnit.Unit = "n_fore-20261201-2", "Pa"
	ch := func(id string) *rig.Rig {
		return &rig.Rig{Channels: []rig.Channel{{Name: "n_fore", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1}, Calibration: rig.Calibration{ID: id}}}}
	}
	tests := []struct {
		name   string
		id     string
		lookup calibrate.Lookup
		want   string
	}{
		{"no store", rec.ID, nil, `channel "n_fore": stored calibration "n_fore-20261201-1": no calibration store to look it up in; give an inline poly`},
		{"unknown id", "nope", lookupOf(rec), `channel "n_fore": stored calibration "nope": not found (list them with the dashboard's calibration page, or run liftyard calibrate)`},
		{"other channel", other.ID, lookupOf(other), `channel "n_fore": stored calibration "n_aft-20261201-1": it was made for channel "n_aft"; calibrate channel "n_fore", or name the channel "n_aft" in the rig file`},
		{"unit of another quantity", wrongUnit.ID, lookupOf(wrongUnit), `channel "n_fore": stored calibration "n_fore-20261201-2": its unit "Pa" does not fit channel quantity "force"`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := calibrate.NewCalibratorFrom(ch(tt.id), tt.lookup)
			require.Error(t, err)
			assert.Contains(t, err.Error(), tt.want)
		})
	}
}

// Ensure that a calibration record written before records carried a span
// uncertainty (today's JSON, no span_u_rel) reads with SpanURel 0, and that
// the span stated on a record reaches the calibrated series (issue 10).
func TestRecord_SpanURel_OlderRecordReadsZero(t *testing.T) {
	old := `{"id":"n-1","channel":"n","unit":"N","created":"2026-11-30T10:00:00Z","reference_u":0.01,` +
		`"points":[{"applied":0,"reading":0},{"applied":10,"reading":1000},{"applied":20,"reading":2000}],` +
		`"fit":{"order":1,"poly":[0,0.01],"poly_u":[0,0],"cov":[[0,0],[0,0]],"residual_sd":0,"dof":1,"nonlinearity_pct_fs":0,"hysteresis_pct_fs":0}}`
	var rec calibrate.Record
	require.NoError(t, json.Unmarshal([]byte(old), &rec))
	assert.Zero(t, rec.SpanURel)
	rec.SpanURel = 0.005
	data, err := json.Marshal(rec)
	require.NoError(t, err)
	assert.Contains(t, string(data), `"span_u_rel":0.005`)
	r := &rig.Rig{Channels: []rig.Channel{{Name: "n", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1},
		Calibration: rig.Calibration{ID: "n-1"}}}}
	cal, err := calibrate.NewCalibratorFrom(r, func(string) (calibrate.Record, error) { return rec, nil })
	require.NoError(t, err)
	b := cal.Apply(&acquire.Block{Series: []acquire.Series{{Channel: "n", Raw: []float64{1000}}}})
	assert.InDelta(t, 10, b.Series[0].Values[0], 1e-12)
	assert.Equal(t, 0.005, b.Series[0].URel)
}

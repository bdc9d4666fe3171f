package storage_test

import (
	"bytes"
	"encoding/csv"
	"math"
	"strconv"
	"strings"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/rig"
)

// Ensure that the values export calibrates every sample with the given
// calibrator, names each column with its source and SI unit, writes the
// rows of the timeline source (balance) with the other source's values
// interpolated between its samples either side (the nearest within one of
// its periods outside them), and leaves a blank where there is none.
func TestExportValues(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	r := &rig.Rig{Name: "values", Channels: []rig.Channel{
		{Name: "alpha", Quantity: rig.QuantityAngle, Unit: "deg", ToSI: rig.Affine{Scale: math.Pi / 180}, Calibration: rig.Calibration{Poly: []float64{-180, 0.5}}},
		{Name: "n_fore", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1}, Calibration: rig.Calibration{Poly: []float64{-12.5, 0.0025}, U: 0.1}},
		{Name: "dp", Quantity: rig.QuantityPressure, Unit: "kPa", ToSI: rig.Affine{Scale: 1000}},
		{Name: "unused", Quantity: rig.QuantityVoltage, Unit: "V", ToSI: rig.Affine{Scale: 1}},
	}}
	cal, err := calibrate.NewCalibrator(r)
	if err != nil {
		t.Fatal(err)
	}
	bal := &acquire.Block{Source: "balance", T0Us: 2_000_000, DtUs: 1000, Series: []acquire.Series{
		{Channel: "n_fore", Raw: []float64{10000, math.NaN(), 12000}},
		{Channel: "alpha", Raw: []float64{360, 364, 368}},
		{Channel: "not_in_rig", Raw: []float64{1, 2, 3}},
	}}
	pit := &acquire.Block{Source: "pitot", T0Us: 2_001_500, DtUs: 1000, Series: []acquire.Series{{Channel: "dp", Raw: []float64{0.2, 0.25}}}}
	writeBlocks(t, s, id, bal, pit)
	var buf bytes.Buffer
	if err := s.ExportValues(&buf, id, r, cal); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(recs[0], ","); got != "t_s,balance/alpha_rad,balance/n_fore_n,pitot/dp_pa" {
		t.Errorf("header %q", got)
	}
	num := func(s string) float64 {
		if s == "" {
			return math.NaN()
		}
		v, _ := strconv.ParseFloat(s, 64)
		return v
	}
	// pitot samples (period 1 ms) at 2.0015 and 2.0025: none within 1 ms
	// of 2.000; at 2.001 only the one after, 0.5 ms away; 2.002 halfway
	// between the two.
	want := [][4]float64{
		{2.000000, 0, 12.5, math.NaN()},
		{2.001, 2 * math.Pi / 180, math.NaN(), 200},
		{2.002, 4 * math.Pi / 180, 17.5, 225},
	}
	if len(recs)-1 != len(want) {
		t.Fatalf("%d rows, want %d:\n%v", len(recs)-1, len(want), recs)
	}
	for i, w := range want {
		for j := range 4 {
			got := num(recs[i+1][j])
			if math.IsNaN(w[j]) != math.IsNaN(got) || (!math.IsNaN(got) && math.Abs(got-w[j]) > 1e-12) {
				t.Errorf("row %d col %s = %q, want %g", i+1, recs[0][j], recs[i+1][j], w[j])
			}
		}
	}
}

// Ensure the raw CSV round trip: what ExportRaw writes, acquire.ReadRawCSV
// reads back sample for sample (times exact to the µs, NaN as blank), in
// blocks of one spacing split at the gap.
func TestExportRaw_ImportRoundTrip(t *testing.T) {
	s := MustOpenStore(t)
	id := mustCreateRun(t, s)
	var blocks []*acquire.Block
	for seq := range uint64(5) {
		b := testBlock("carriage", seq, 8, "n_fore", "pitot")
		b.T0Us += 1_733_061_000_000_000
		if seq >= 3 {
			b.T0Us += 250_000 // a gap of 0.25 s
		}
		b.Series[1].Raw[3] = math.NaN()
		b.Received = time.Time{} // device time is UTC: t_s is written as stored
		blocks = append(blocks, b)
	}
	writeBlocks(t, s, id, blocks...)
	var buf bytes.Buffer
	if err := s.ExportRaw(&buf, id); err != nil {
		t.Fatal(err)
	}
	var got []acquire.Block
	if err := acquire.ReadRawCSV(&buf, "carriage", 8, func(b acquire.Block) error { got = append(got, b); return nil }); err != nil {
		t.Fatal(err)
	}
	if len(got) != len(blocks) {
		t.Fatalf("%d blocks back, want %d", len(got), len(blocks))
	}
	for k, b := range got {
		w := blocks[k]
		if b.T0Us != w.T0Us || b.DtUs != w.DtUs || b.Len() != w.Len() {
			t.Errorf("block %d: t0 %d dt %d n %d, want %d %d %d", k, b.T0Us, b.DtUs, b.Len(), w.T0Us, w.DtUs, w.Len())
			continue
		}
		for _, ch := range []string{"n_fore", "pitot"} {
			g, wv := b.Raw(ch), w.Raw(ch)
			for i := range wv {
				if !(g[i] == wv[i] || math.IsNaN(g[i]) && math.IsNaN(wv[i])) {
					t.Errorf("block %d %s[%d] = %v, want %v", k, ch, i, g[i], wv[i])
				}
			}
		}
	}
}

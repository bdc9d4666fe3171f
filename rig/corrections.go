package rig

import (
	"fmt"
	"math"
	"slices"
	"strings"
)

// The corrections of the trade that a rig file may name (docs/rig-file.md
// "Corrections", docs/physics.md "Corrections"). Each is optional; its
// absence means "none", which is what every rig file written before them
// gets.

// TareChannel is one channel's weight (and buoyancy) tare against the angle
// of attack ([[tare]]): the flow-off reading of the channel as the model's
// own weight (less its buoyancy, in water) turns with α,
//
//	tare(α) = a + b·sin α + c·cos α
//
// as calibrate.FitTare fits it from a flow-off angle sweep. It is
// subtracted from the channel's calibrated reading at the measured angle,
// before the flow-off zero and the balance matrix.
type TareChannel struct {
	Channel string
	// Coef holds a, b, c in the channel's Unit (as the channel's calibration
	// yields it), like Calibration.Poly.
	Coef [3]float64
	// U is the standard uncertainty of the tare at any angle inside the
	// sweep, in the channel's Unit (FitTare's residual SD, or larger).
	U float64
}

// Balance is a multi-component balance's interaction matrix ([balance]):
// the load components are
//
//	F_k = Σ_j C[k][j]·t_j,  t = (o_1 … o_N [, o_i·o_j for i ≤ j])
//
// with o the zero-corrected, tare-corrected readings of the Outputs
// channels (each in its channel's Unit) and F_k in the Unit of
// Components[k], as calibrate.FitBalance fits it from combined loadings.
// The second-order terms are present when each row of Matrix has
// N + N(N+1)/2 entries (N = len(Outputs)) rather than N.
type Balance struct {
	Outputs    []string    // channels the matrix reads (bridge outputs), in the matrix's column order
	Components []string    // channels whose values the matrix's rows replace (default: Outputs)
	Matrix     [][]float64 // K×P, in the channels' units
	// U holds, per component, the standard uncertainty of one component
	// value from the matrix (FitBalance's residual SD of that component, or
	// larger), in the component channel's Unit.
	U []float64
}

// SecondOrder reports whether the matrix has the products o_i·o_j as
// terms.
func (b *Balance) SecondOrder() bool {
	n := len(b.Outputs)
	return len(b.Matrix) > 0 && len(b.Matrix[0]) == n+n*(n+1)/2 && n > 0
}

// Blockage is the solid- and wake-blockage correction of a closed test
// section or a towing tank ([blockage]), after the classic closed-section
// method (Thom's short form for solid blockage, wake blockage from the
// measured drag; Barlow, Rae & Pope, Low-Speed Wind Tunnel Testing, 3rd ed.
// 1999, ch. 10; see docs/physics.md "Corrections"). The blockage factor ε
// raises the dynamic pressure at the model: q_c = q·(1 + ε)².
type Blockage struct {
	SectionAreaM2 float64 // C: the test section's (or the tank's wetted) cross-section, m²
	ModelVolumeM3 float64 // model volume for solid blockage, m³ (0: no solid blockage)
	SolidK        float64 // shape factor K of ε_sb = K·V/C^{3/2} (default 0.90 for a foil, 0.96 otherwise)
	Wake          bool    // wake blockage ε_wb = S/(4C)·C_D,u (default on)
	UFrac         float64 // standard uncertainty of ε as a fraction of ε (default 0.25)
}

// Defaults of [blockage].
const (
	// BlockageKWing is Thom's shape factor K for a three-dimensional wing
	// (Barlow, Rae & Pope 1999 §10.2, from memory).
	BlockageKWing = 0.90
	// BlockageKBody is K for a body of revolution (same source, from memory).
	BlockageKBody = 0.96
	// BlockageUFrac is the default standard uncertainty of ε as a
	// fraction of ε (common practice: the classic corrections are trusted
	// to about a quarter of their size).
	BlockageUFrac = 0.25
)

// SolidEpsFrac returns the solid-blockage factor ε_sb = K·V/C^{3/2}, or 0 when
// the section or the volume is not given.
func (b *Blockage) SolidEpsFrac() float64 {
	if b == nil || !(b.SectionAreaM2 > 0) || !(b.ModelVolumeM3 > 0) {
		return 0
	}
	return b.SolidK * b.ModelVolumeM3 / math.Pow(b.SectionAreaM2, 1.5)
}

var (
	tareKeys     = []string{"channel", "coef", "u"}
	balanceKeys  = []string{"outputs", "components", "matrix", "u"}
	blockageKeys = []string{"section_area_m2", "model_volume_m3", "solid_k", "wake", "u_fraction"}
)

// corrections reads [[tare]], [balance] and [blockage] from the top table.
func (d *decoder) corrections(top *table, r *Rig) {
	for i, m := range top.items("tare") {
		r.Tare = append(r.Tare, d.tare(i, m))
	}
	r.Balance = d.balance(top.sub("balance", balanceKeys...))
	r.Blockage = d.blockage(top.sub("blockage", blockageKeys...), r.Kind)
}

func (d *decoder) tare(i int, m map[string]any) TareChannel {
	subject := fmt.Sprintf("[[tare]] #%d", i+1)
	if n, ok := m["channel"].(string); ok && n != "" {
		subject = fmt.Sprintf("tare of %q", n)
	}
	t := d.table(indexPath("tare", i), subject, m, tareKeys...)
	tc := TareChannel{}
	tc.Channel, _ = t.str("channel")
	if !t.has("channel") {
		t.errf("channel", ErrMissing, "channel missing (add channel = the name of the [[channel]] whose reading the tare is)")
	}
	if t.has("coef") {
		c := t.numList("coef")
		if len(c) == 3 {
			copy(tc.Coef[:], c)
		} else {
			t.errf("coef", ErrValue, "coef must be [a, b, c] of tare(α) = a + b·sin α + c·cos α, in the channel's unit (as liftyard's weight-tare fit gives them)")
		}
	} else {
		t.errf("coef", ErrMissing, "coef missing (add coef = [a, b, c] of tare(α) = a + b·sin α + c·cos α, from a flow-off angle sweep)")
	}
	var ok bool
	if tc.U, ok = t.num("u"); !ok && !t.has("u") {
		t.errf("u", ErrMissing, "u missing (add u = the standard uncertainty of the tare, in the channel's unit: the fit's residual SD or more)")
	} else if ok && tc.U < 0 {
		t.errf("u", ErrValue, "u must be ≥ 0 (a standard uncertainty), not %g", tc.U)
	}
	t.unknown()
	return tc
}

func (d *decoder) balance(t *table) *Balance {
	if t == nil {
		return nil
	}
	t.subject = "balance"
	b := &Balance{}
	b.Outputs = t.strList("outputs")
	if !t.has("outputs") {
		t.errf("outputs", ErrMissing, "outputs missing (add outputs = [\"n_fore\", \"n_aft\", ...], the channels the matrix reads, in column order)")
	}
	b.Components = t.strList("components")
	if !t.has("components") {
		b.Components = slices.Clone(b.Outputs)
	}
	switch v := t.m["matrix"].(type) {
	case nil:
		t.errf("matrix", ErrMissing, "matrix missing (add matrix = [[...], [...]], one row per component, as liftyard's balance fit gives it)")
	case []any:
		for k, row := range v {
			arr, isArr := row.([]any)
			if !isArr {
				t.errf("matrix", ErrValue, "matrix row %d must be an array of numbers, not %s", k+1, typeName(row))
				b.Matrix = nil
				break
			}
			vals := make([]float64, 0, len(arr))
			for j, e := range arr {
				f, ok := t.toNum("matrix", fmt.Sprintf("matrix[%d][%d]", k, j), e)
				if !ok {
					break
				}
				vals = append(vals, f)
			}
			if len(vals) != len(arr) {
				b.Matrix = nil
				break
			}
			b.Matrix = append(b.Matrix, vals)
		}
	default:
		t.errf("matrix", ErrValue, "matrix must be an array of rows, like [[1.0, 0.02], [0.01, 0.98]], not %s", typeName(v))
	}
	if t.has("u") {
		b.U = t.numList("u")
	} else {
		t.errf("u", ErrMissing, "u missing (add u = [u_1, ...], the standard uncertainty of each component from the matrix, in its channel's unit)")
	}
	n, k := len(b.Outputs), len(b.Components)
	if n > 0 && k > 0 && b.Matrix != nil {
		p1, p2 := n, n+n*(n+1)/2
		switch {
		case len(b.Matrix) != k:
			t.errf("matrix", ErrValue, "matrix has %d rows for %d components: give one row per component", len(b.Matrix), k)
		default:
			for i, row := range b.Matrix {
				if len(row) != p1 && len(row) != p2 || len(row) != len(b.Matrix[0]) {
					t.errf("matrix", ErrValue, "matrix row %d has %d entries: give %d (one per output) or %d (outputs, then the products o_i·o_j, i ≤ j) in every row", i+1, len(row), p1, p2)
					break
				}
			}
		}
	}
	if t.has("u") && b.U != nil && len(b.U) != k {
		t.errf("u", ErrValue, "u has %d entries for %d components", len(b.U), k)
	}
	for _, u := range b.U {
		if u < 0 {
			t.errf("u", ErrValue, "u must be ≥ 0 (standard uncertainties), not %g", u)
			break
		}
	}
	t.unknown()
	return b
}

func (d *decoder) blockage(t *table, kind Kind) *Blockage {
	if t == nil {
		return nil
	}
	t.subject = "blockage"
	b := &Blockage{SolidK: BlockageKBody, Wake: true, UFrac: BlockageUFrac}
	if kind == KindFoil {
		b.SolidK = BlockageKWing
	}
	var ok bool
	if b.SectionAreaM2, ok = t.num("section_area_m2"); !ok && !t.has("section_area_m2") {
		t.errf("section_area_m2", ErrMissing, "section_area_m2 missing (add section_area_m2 = the test section's or the tank's wetted cross-section, in m²)")
	} else if ok && b.SectionAreaM2 <= 0 {
		t.errf("section_area_m2", ErrValue, "section_area_m2 must be > 0, not %g", b.SectionAreaM2)
	}
	if b.ModelVolumeM3, ok = t.num("model_volume_m3"); ok && b.ModelVolumeM3 < 0 {
		t.errf("model_volume_m3", ErrValue, "model_volume_m3 must be ≥ 0, not %g", b.ModelVolumeM3)
	}
	if v, ok := t.num("solid_k"); ok {
		if v <= 0 || v > 5 {
			t.errf("solid_k", ErrValue, "solid_k must be a shape factor > 0 (about 0.9 for a wing, 0.96 for a body of revolution), not %g", v)
		}
		b.SolidK = v
	}
	if v, present := t.m["wake"]; present {
		w, isBool := v.(bool)
		if !isBool {
			t.errf("wake", ErrValue, "wake must be true or false, not %s", typeName(v))
		}
		b.Wake = w
	}
	if v, ok := t.num("u_fraction"); ok {
		if v < 0 || v > 1 {
			t.errf("u_fraction", ErrValue, "u_fraction must be within 0 to 1 (the standard uncertainty of the correction as a fraction of it), not %g", v)
		}
		b.UFrac = v
	}
	if kind == KindRoof {
		t.errf("section_area_m2", ErrValue, "a blockage correction applies to force-balance rigs (foil, body, rotor), not to a roof's pressure taps")
	}
	t.unknown()
	return b
}

// corrections checks that the tare and the balance name force or moment
// channels the file declares, each once.
func (v *validator) corrections() {
	forceLike := func(path, role, name string) {
		if name == "" {
			return
		}
		ch, ok := v.r.Channel(name)
		switch {
		case !ok:
			v.add(path, ErrValue, "%s names channel %q, which no [[channel]] declares", role, name)
		case ch.Quantity != QuantityForce && ch.Quantity != QuantityMoment:
			v.add(path, ErrValue, "%s names channel %q, a %s channel: a tare or a balance matrix applies to force and moment channels", role, name, ch.Quantity)
		}
	}
	seen := map[string]bool{}
	for i, tc := range v.r.Tare {
		path := indexPath("tare", i) + ".channel"
		forceLike(path, "tare", tc.Channel)
		if seen[tc.Channel] && tc.Channel != "" {
			v.add(path, ErrDuplicate, "tare of channel %q is given twice", tc.Channel)
		}
		seen[tc.Channel] = true
	}
	if b := v.r.Balance; b != nil {
		for _, list := range []struct {
			key   string
			names []string
		}{{"outputs", b.Outputs}, {"components", b.Components}} {
			if list.key == "components" && slices.Equal(b.Components, b.Outputs) {
				continue // the default, or the outputs again: checked once
			}
			dup := map[string]bool{}
			for _, n := range list.names {
				forceLike("balance."+list.key, "balance "+list.key, n)
				if dup[n] {
					v.add("balance."+list.key, ErrDuplicate, "balance: %s lists %q twice", list.key, n)
				}
				dup[n] = true
			}
		}
	}
	if bl := v.r.Blockage; bl != nil && bl.SectionAreaM2 > 0 && v.r.Reference.AreaM2 >= bl.SectionAreaM2 {
		v.add("blockage.section_area_m2", ErrValue, "blockage: section_area_m2 = %g m² is not larger than the reference area %g m²", bl.SectionAreaM2, v.r.Reference.AreaM2)
	}
}

// formatCorrections writes the corrections as Parse reads them.
func formatCorrections(w func(string, ...any), r *Rig) {
	nums := func(xs []float64) string {
		parts := make([]string, len(xs))
		for i, x := range xs {
			parts[i] = num(x)
		}
		return "[" + strings.Join(parts, ", ") + "]"
	}
	for _, tc := range r.Tare {
		w("\n[[tare]]\nchannel = %s\ncoef = %s\nu = %s\n", quote(tc.Channel), nums(tc.Coef[:]), num(tc.U))
	}
	if b := r.Balance; b != nil {
		rows := make([]string, len(b.Matrix))
		for i, row := range b.Matrix {
			rows[i] = nums(row)
		}
		w("\n[balance]\noutputs = %s\ncomponents = %s\nmatrix = [%s]\nu = %s\n",
			strList(b.Outputs), strList(b.Components), strings.Join(rows, ", "), nums(b.U))
	}
	if b := r.Blockage; b != nil {
		w("\n[blockage]\nsection_area_m2 = %s\nmodel_volume_m3 = %s\nsolid_k = %s\nwake = %t\nu_fraction = %s\n",
			num(b.SectionAreaM2), num(b.ModelVolumeM3), num(b.SolidK), b.Wake, num(b.UFrac))
	}
}

package estimate

import (
	"fmt"
	"io"
	"math"
	"sort"

	"liftyard/calibrate"
)

// SpinDesignCurve is a rotor's design lift against the spin ratio S = ωR/V,
// given as points and interpolated linearly in S (issue 12). Like
// DesignCurve it gives no value outside its first and last spin ratio. It
// is immutable and safe for concurrent use.
type SpinDesignCurve struct {
	Name      string    // where the curve came from (file name)
	SpinRatio []float64 // strictly increasing
	CL        []float64
	CLU95     []float64 // expanded (95 %) uncertainty of each C_L; zeros when the file has none
}

// ParseSpinDesignCurve reads a rotor's design curve CSV:
//
//	spin_ratio,cl[,cl_u95]
//	0,0,0.15
//	1,2.1,0.25
//
// with the rules of ParseDesignCurve (header required, columns in any
// order, rows sorted, errors naming the line and column). A header against
// the angle of attack (alpha_deg) is refused with a message that says so.
func ParseSpinDesignCurve(r io.Reader, name string) (*SpinDesignCurve, error) {
	data, err := io.ReadAll(r)
	if err != nil {
		return nil, designCurveError(name, 0, "", "%v", err)
	}
	rows, err := readCurve(data, name, "spin_ratio")
	if err != nil {
		return nil, err
	}
	d := &SpinDesignCurve{Name: name}
	for i, rw := range rows {
		if i > 0 && rw.a == rows[i-1].a {
			return nil, designCurveError(name, rw.line, "spin_ratio", "spin ratio %g is given twice (also on line %d)", rw.a, rows[i-1].line)
		}
		d.SpinRatio = append(d.SpinRatio, rw.a)
		d.CL = append(d.CL, rw.c)
		d.CLU95 = append(d.CLU95, rw.u)
	}
	return d, nil
}

// AtSpinRatio interpolates linearly between the two rows around S and
// returns the design C_L as a Value (standard u = U95/1.96, ν = +Inf) with
// the local slope dC_L/dS; ok is false outside the curve.
func (d *SpinDesignCurve) AtSpinRatio(spinRatio float64) (cl calibrate.Value, slope float64, ok bool) {
	n := len(d.SpinRatio)
	if n < 2 || !(spinRatio >= d.SpinRatio[0] && spinRatio <= d.SpinRatio[n-1]) {
		return calibrate.Value{}, 0, false
	}
	i := max(sort.SearchFloat64s(d.SpinRatio, spinRatio), 1)
	s0, s1 := d.SpinRatio[i-1], d.SpinRatio[i]
	f := (spinRatio - s0) / (s1 - s0)
	slope = (d.CL[i] - d.CL[i-1]) / (s1 - s0)
	u95 := d.CLU95[i-1] + f*(d.CLU95[i]-d.CLU95[i-1])
	return calibrate.Value{X: d.CL[i-1] + f*(d.CL[i]-d.CL[i-1]), U: u95 / calibrate.K95(math.Inf(1)), Dof: math.Inf(1)}, slope, true
}

// Describe says in a few words what the design is, for reports.
func (d *SpinDesignCurve) Describe() string {
	n := len(d.SpinRatio)
	if n == 0 {
		return "design curve against spin ratio (empty)"
	}
	return fmt.Sprintf("design curve %s (%d points, S = %.2f to %.2f)", d.Name, n, d.SpinRatio[0], d.SpinRatio[n-1])
}

// SpinDesignAt returns the design value at a measured spin ratio and the
// normalised error of the measured C_L against it, as DesignAt does for
// the angle: En = (C_L,m − C_L,d)/√(U_m² + U_d²) with
// U_d² = U95(C_L,d)² + (dC_L,d/dS · U95(S))², since the design is read at a
// measured spin ratio. ok is false when d is nil, S is not a number or
// lies outside the curve.
func SpinDesignAt(d *SpinDesignCurve, spinRatio, cl calibrate.Value) (design calibrate.Value, en float64, ok bool) {
	if d == nil || !finite(spinRatio.X) {
		return calibrate.Value{}, math.NaN(), false
	}
	dv, slope, ok := d.AtSpinRatio(spinRatio.X)
	if !ok {
		return calibrate.Value{}, math.NaN(), false
	}
	us := 0.0
	if spinRatio.U > 0 {
		us = slope * spinRatio.U95()
	}
	return dv, (cl.X - dv.X) / math.Hypot(cl.U95(), math.Hypot(dv.U95(), us)), true
}

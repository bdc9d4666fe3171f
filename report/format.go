package report

import (
	"math"
	"strconv"
	"strings"
	"time"
)

// The report only rounds and labels: every number was computed upstream.

const dash = "—"

// minus writes a typographic minus sign, which reads better in print and
// does not break a number across lines.
func minus(s string) string { return strings.Replace(s, "-", "−", 1) }

// fix rounds v to digits decimals; "—" when v is missing.
func fix(v float64, digits int) string {
	if !finite(v) {
		return dash
	}
	s := strconv.FormatFloat(v, 'f', max(digits, 0), 64)
	if strings.Trim(s, "-0.") == "" {
		s = strings.TrimPrefix(s, "-") // no "−0.00"
	}
	return minus(s)
}

// decimalsFor2Sig returns the decimal place that shows u with two
// significant digits (JCGM 100:2008 §7.2.6: "at most two significant
// digits"); negative means tens, hundreds, ... It is ok = false for a
// missing or zero u.
func decimalsFor2Sig(u float64) (d int, ok bool) {
	u = math.Abs(u)
	if !finite(u) || u == 0 {
		return 0, false
	}
	d = 1 - int(math.Floor(math.Log10(u)))
	// Rounding may carry into the next power (0.0996 → 0.10): check.
	if r := roundTo(u, d); r >= math.Pow(10, float64(2-d)) {
		d--
	}
	return min(d, 12), true
}

// roundTo rounds v to d decimals (d < 0 rounds to tens, hundreds, ...).
func roundTo(v float64, d int) float64 {
	p := math.Pow(10, float64(d))
	return math.Round(v*p) / p
}

// atDecimals formats v rounded to d decimals (d may be negative).
func atDecimals(v float64, d int) string {
	if d >= 0 {
		return fix(v, d)
	}
	return fix(roundTo(v, d), 0)
}

// PlusMinus writes "v ± U" by liftyard's one rounding rule, used by the
// report and every dashboard page: U to two significant digits (JCGM
// 100:2008 §7.2.6) and v to the same decimal place; without a usable U, v
// to fallback decimals; "—" for a missing v (docs/report.md "Rounding").
func PlusMinus(v, u float64, fallback int) string { return pm(v, u, fallback) }

// pm writes "v ± U" with U to two significant digits and v to the same
// decimal place. Without a usable U it writes v to fallback decimals.
func pm(v, u float64, fallback int) string {
	if !finite(v) {
		return dash
	}
	d, ok := decimalsFor2Sig(u)
	if !ok {
		return fix(v, fallback)
	}
	return atDecimals(v, d) + " ± " + atDecimals(u, d)
}

// sig writes v to n significant digits, switching to "m×10ⁿ" for large or
// small magnitudes (a Reynolds number: "3.2×10⁵").
func sig(v float64, n int) string {
	if !finite(v) {
		return dash
	}
	if v == 0 {
		return "0"
	}
	e := int(math.Floor(math.Log10(math.Abs(v))))
	m := v / math.Pow(10, float64(e))
	if math.Abs(roundTo(m, n-1)) >= 10 {
		m /= 10
		e++
	}
	if e >= -3 && e < 5 {
		return fix(v, max(n-1-e, 0))
	}
	return fix(m, n-1) + "×10" + superscript.Replace(strconv.Itoa(e))
}

var superscript = strings.NewReplacer("0", "⁰", "1", "¹", "2", "²", "3", "³", "4", "⁴", "5", "⁵", "6", "⁶", "7", "⁷", "8", "⁸", "9", "⁹", "-", "⁻")

// pct writes a fraction as a percentage with one decimal.
func pct(frac float64) string {
	if !finite(frac) {
		return dash
	}
	return fix(100*frac, 1) + " %"
}

// when writes a time in UTC to the second; "—" for the zero time.
func when(t time.Time) string {
	if t.IsZero() {
		return dash
	}
	return t.UTC().Format("2006-01-02 15:04:05 UTC")
}

// day writes a date; "—" for the zero time.
func day(t time.Time) string {
	if t.IsZero() {
		return dash
	}
	return t.UTC().Format("2006-01-02")
}

// dur writes a duration rounded to the second.
func dur(d time.Duration) string {
	if d <= 0 {
		return dash
	}
	return d.Round(time.Second).String()
}

// dof writes degrees of freedom: "∞" for an exact input.
func dof(v float64) string {
	switch {
	case math.IsInf(v, 1):
		return "∞"
	case !finite(v):
		return dash
	case v >= 1000:
		return sig(v, 2)
	}
	return fix(v, 0)
}

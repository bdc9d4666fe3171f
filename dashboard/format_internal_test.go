package dashboard

import (
	"math"
	"testing"
)

// Ensure that display rounding follows JCGM 100:2008 §7.2.6 (uncertainty
// with two significant digits, the value to the same decimal place) — the
// report's rule — and that a missing value is a dash.
func TestFormat(t *testing.T) {
	nan := num(math.NaN())
	tests := []struct {
		name, got, want string
	}{
		{"pm fixed decimals suffice", pm(0.43, 0.0235, 3), "0.430 ± 0.024"},
		{"pm small u widens both", pm(4, 0.098, 2), "4.000 ± 0.098"},
		{"pm large u keeps digits", pm(612.5, 2.94, 1), "612.5 ± 2.9"},
		// issue 13: the page showed "1988.9 ± 28.0" where the report showed
		// "1989 ± 28"; one rule now, with the report's typographic minus.
		{"pm u of tens rounds the value", pm(1988.9, 28.0, 1), "1989 ± 28"},
		{"pm u of hundreds", pm(123456, 340, 0), "123460 ± 340"},
		{"pm rounding carries", pm(1, 0.0996, 3), "1.00 ± 0.10"},
		{"pm negative", pm(-0.43, 0.0235, 3), "−0.430 ± 0.024"},
		{"pm missing u", pm(1.5, nan, 2), "1.50"},
		{"pm missing value", pm(nan, 0.1, 2), "—"},
		{"fix", fix(999.06, 1), "999.1"},
		{"fix inf", fix(num(math.Inf(1)), 1), "—"},
		{"sci Reynolds", sci(2.9e5), "2.90×10⁵"},
		{"sci rounding carries", sci(9.999e5), "1.00×10⁶"},
		{"sci negative exponent", sci(1.5e-5), "1.50×10⁻⁵"},
		{"sci small stays plain", sci(12.34), "12.3"},
		{"sci zero", sci(0), "0"},
		{"sci NaN", sci(nan), "—"},
	}
	for _, tt := range tests {
		if tt.got != tt.want {
			t.Errorf("%s: %q, want %q", tt.name, tt.got, tt.want)
		}
	}
}

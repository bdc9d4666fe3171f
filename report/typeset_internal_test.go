package report

import (
	"strings"
	"testing"
)

// Ensure that the plots' SVG text gets a sans-serif font list and real
// subscripts: "C_L" becomes C with a lowered, smaller L, and the text
// after a subscript returns to the baseline.
func TestTypeset(t *testing.T) {
	in := `<text x="1" y="2" transform="scale(1, -1)"
	style="font-family:Liberation Sans;font-variant:normal;font-size:10px">C_D = C_D0 + K·(C_L − C_L,minD)²</text>` +
		`<text x="1" y="2" style="font-family:Liberation Sans;font-size:9.5px">0.25</text>`
	got := typeset(in)
	want := `<text x="1" y="2" transform="scale(1, -1)"
	style="font-family:'Liberation Sans',Arial,Helvetica,sans-serif;font-variant:normal;font-size:10px">` +
		`C<tspan dy="2.80" font-size="7.50px">D</tspan><tspan dy="-2.80"> = C</tspan><tspan dy="2.80" font-size="7.50px">D0</tspan>` +
		`<tspan dy="-2.80"> + K·(C</tspan><tspan dy="2.80" font-size="7.50px">L</tspan><tspan dy="-2.80"> − C</tspan>` +
		`<tspan dy="2.80" font-size="7.50px">L,minD</tspan><tspan dy="-2.80">)²</tspan></text>` +
		`<text x="1" y="2" style="font-family:'Liberation Sans',Arial,Helvetica,sans-serif;font-size:9.5px">0.25</text>`
	if got != want {
		t.Errorf("typeset:\n got %s\nwant %s", got, want)
	}
	if strings.Contains(typeset(`<text style="font-size:11px">C_L</text>`), "C_L") {
		t.Error("C_L left literal")
	}
}

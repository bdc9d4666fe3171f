package report

import (
	"bytes"
	"fmt"
	"regexp"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"

	"liftyard/estimate"
	"liftyard/storage"
)

// LiftPlotSVG draws the report's lift plot of a run as a standalone SVG
// document, for the dashboard's run page: C_L against α with U95 bars in
// both (against the spin ratio S for a rotor), and the lift line over the
// linear range when the run's kind fits one and the fit succeeds. No
// design curve is drawn (that needs the rig file's folder; the report
// has it). Segments without C_L or abscissa are left out and the x label
// says how many; with none left it draws empty axes that say so.
func LiftPlotSVG(run storage.Run, segs []estimate.Segment) ([]byte, error) {
	r := &Report{Run: run, Segments: segs}
	r.fitPolar(estimate.PolarOptions{})
	p, _, left, err := r.drawLift()
	if err != nil {
		return nil, fmt.Errorf("run %d: %w", run.ID, err)
	}
	switch {
	case p == nil:
		xLabel := "angle of attack α [°]"
		if r.section().spin {
			xLabel = "spin ratio S = ωR/V"
		}
		p = emptyPlot("Lift coefficient", xLabel+" — no segments with C_L yet", "C_L")
	case left > 0:
		p.X.Label.Text += " — " + strconv.Itoa(left) + " segment(s) without C_L or abscissa not shown"
	}
	p.Title.Text = fmt.Sprintf("Run %d: %s", run.ID, p.Title.Text)
	return standaloneSVG(p)
}

// ZonePlotSVG draws the report's zone plot of a roof run as a standalone
// SVG document, for the dashboard's run page: each block's net Cp mean per
// zone with U95 bars, beside the zone's design value. Rows without a zone
// or Cp mean are left out and the x label says how many; with none left it
// draws empty axes that say so.
func ZonePlotSVG(run storage.Run, segs []estimate.Segment) ([]byte, error) {
	r := &Report{Run: run, Segments: segs}
	p, left, err := r.drawZones()
	if err != nil {
		return nil, fmt.Errorf("run %d: %w", run.ID, err)
	}
	switch {
	case p == nil:
		p = emptyPlot("Net pressure coefficient per zone", "zone — no roof blocks yet", "net Cp (negative = uplift)")
	case left > 0:
		p.X.Label.Text += " — " + strconv.Itoa(left) + " row(s) without a zone Cp not shown"
	}
	p.Title.Text = fmt.Sprintf("Run %d: %s", run.ID, p.Title.Text)
	return standaloneSVG(p)
}

// emptyPlot is a plot's frame with nothing in it (unit axes).
func emptyPlot(title, xLabel, yLabel string) *plot.Plot {
	p := newPlot(title, xLabel, yLabel)
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, 1
	return p
}

// standaloneSVG renders p as an SVG document of the report's plot size.
func standaloneSVG(p *plot.Plot) ([]byte, error) { return SVG(p, plotW, plotH) }

// SVG renders a gonum plot as a standalone SVG document of size w × h: the
// one SVG writer of the report and the dashboard's plots.
func SVG(p *plot.Plot, w, h vg.Length) ([]byte, error) {
	placeLegend(p)
	wt, err := p.WriterTo(w, h, "svg")
	if err != nil {
		return nil, fmt.Errorf("svg: %w", err)
	}
	var buf bytes.Buffer
	if _, err := wt.WriteTo(&buf); err != nil {
		return nil, fmt.Errorf("svg: %w", err)
	}
	return []byte(typeset(buf.String())), nil
}

// svgFont is the font list of every text of our plots: gonum/plot names
// Liberation Sans alone, and a viewer without it would fall back to its
// default font, often a serif one.
const svgFont = "font-family:'Liberation Sans',Arial,Helvetica,sans-serif;"

var (
	svgTextRE = regexp.MustCompile(`(?s)(<text [^>]*font-size:([0-9.]+)px[^>]*>)([^<]*)(</text>)`)
	// subRE finds our labels' subscripts: C_L, C_D0, E_n, N_eff, C_L,design.
	subRE = regexp.MustCompile(`([A-Za-z])_([A-Za-z0-9]+(?:,[A-Za-z]+)?)`)
)

// typeset gives the gonum/plot SVG a sans-serif font list and sets the
// subscripts of our labels ("C_L" is drawn as C with a subscript L).
// gonum/plot measured the text with the underscore, so a label with a
// subscript is a little narrower than its box.
func typeset(svg string) string {
	svg = strings.ReplaceAll(svg, "font-family:Liberation Sans;", svgFont)
	return svgTextRE.ReplaceAllStringFunc(svg, func(m string) string {
		g := svgTextRE.FindStringSubmatch(m)
		open, size, body, end := g[1], g[2], g[3], g[4]
		if !strings.Contains(body, "_") {
			return m
		}
		px, err := strconv.ParseFloat(size, 64)
		if err != nil || px <= 0 {
			return m
		}
		shift := strconv.FormatFloat(0.28*px, 'f', 2, 64)
		small := strconv.FormatFloat(0.75*px, 'f', 2, 64)
		var b strings.Builder
		b.WriteString(open)
		last, lowered := 0, false
		for _, ix := range subRE.FindAllStringSubmatchIndex(body, -1) {
			plain := body[last:ix[3]] // up to and including the base letter
			if lowered {
				b.WriteString(`<tspan dy="-` + shift + `">` + plain + `</tspan>`)
			} else {
				b.WriteString(plain)
			}
			b.WriteString(`<tspan dy="` + shift + `" font-size="` + small + `px">` + body[ix[4]:ix[5]] + `</tspan>`)
			last, lowered = ix[1], true
		}
		if rest := body[last:]; lowered && rest != "" {
			b.WriteString(`<tspan dy="-` + shift + `">` + rest + `</tspan>`)
		} else {
			b.WriteString(rest)
		}
		b.WriteString(end)
		return b.String()
	})
}

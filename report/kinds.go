package report

import "liftyard/rig"

// section is what the report shows for one rig kind: which rows, which
// plots, which fits and comparisons. sectionOf is the one place that maps
// a rig kind to its section; the rest of the package asks the section,
// never the kind. A new rig kind adds one entry here (and, when its rows
// are new, their table in report.html.tmpl and their plots).
type section struct {
	// zones: the rows are zones in blocks of time (roof.go), shown in the
	// zone table instead of the steady segments, lift curve and design
	// comparison.
	zones bool
	// spin: C_L is plotted and tabled against the spin ratio S = ωR/V
	// (a rotor) instead of α.
	spin bool
	// liftCurve: fit a lift curve C_L(α) to the segments. When false and
	// noLiftCurve is set, the report says that instead.
	liftCurve   bool
	noLiftCurve string
	// design: compare the segments with the rig's [lift] design curve.
	design bool
	// figures are the plots, in order; a nil figure is left out.
	figures func(r *Report) []func() (*figure, error)
	// count is the summary's opening: what was measured.
	count func(r *Report) []string
	// heading is the report's title, before ": run N".
	heading string
}

// sectionOf returns the section of a run's rig kind; a kind this version
// does not know (or none, in an old store) gets the force-balance section.
func sectionOf(kind string) section {
	switch rig.Kind(kind) {
	case rig.KindRotor:
		s := balance()
		s.spin, s.liftCurve, s.design, s.count = true, false, false, rotorCount
		s.noLiftCurve = "A rotor's lift is reported against the spin ratio: C_L(S) is fitted instead of a lift curve in α."
		s.figures = func(r *Report) []func() (*figure, error) {
			return []func() (*figure, error){r.liftPlot, r.spinDragPlot, r.liftDragPlot, r.qPlot}
		}
		return s
	case rig.KindRoof:
		// No q plot: a roof's q is one per block, shown in the block table
		// (a q plot of the rows would repeat each block once per zone).
		return section{
			zones:   true,
			figures: func(r *Report) []func() (*figure, error) { return []func() (*figure, error){r.zonePlot, r.tapMap} },
			count:   func(r *Report) []string { return r.roofSummary() },
			heading: "Roof pressure test report",
		}
	}
	return balance() // rig.KindFoil, rig.KindBody
}

// balance is a force-balance rig's section: steady segments with C_L(α)
// and C_D(α), the lift curve and the design comparison.
func balance() section {
	return section{
		liftCurve: true,
		design:    true,
		figures: func(r *Report) []func() (*figure, error) {
			return []func() (*figure, error){r.liftPlot, r.dragPlot, r.enPlot, r.qPlot}
		},
		count:   balanceCount,
		heading: "Lift test report",
	}
}

// section returns the report's section.
func (r *Report) section() section { return sectionOf(r.Run.Kind) }

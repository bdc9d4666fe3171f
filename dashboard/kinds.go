package dashboard

import (
	"fmt"

	"liftyard/rig"
)

// kindView is what the run page and the live page show for one rig kind:
// which plot, which tables, which cautions. viewOf is the one place that
// maps a rig kind to its view; handlers and templates ask the view, never
// the kind string. A new rig kind adds one case to viewOf (and, when its
// rows are new, their table in run.html and live.html and its plot in
// package report).
type kindView struct {
	// Layout is the live page's layout, the class of its root element
	// (style.css): "balance" shows the C_L tiles, trend and segment table,
	// "roof" the zone tables.
	Layout string
	// Plot is the run page's figure, a route under /runs/{id}/ (plots.go);
	// PlotTitle heads it and plotAlt (with the run id) describes it.
	Plot, PlotTitle, plotAlt string
	// Zones: the run page lists zones in blocks of time (roof) instead of
	// steady segments.
	Zones bool
	// Marks: steady segments may be set by hand (a roof's blocks cannot).
	Marks bool
	// RoofCaution shows the caution about wind loads on buildings.
	RoofCaution bool
	// TapMap shows the roof's tap map (/runs/{id}/taps.svg).
	TapMap bool
}

// kinds are the rig kinds this version knows; a new kind is added here and
// in viewOf.
var kinds = []rig.Kind{rig.KindFoil, rig.KindRoof, rig.KindRotor, rig.KindBody}

// viewOf returns the view of a run's rig kind; a kind this version does
// not know (or none) gets the force-balance view.
func viewOf(kind string) kindView {
	switch rig.Kind(kind) {
	case rig.KindRoof:
		return kindView{
			Layout: "roof", Plot: "zones.svg", PlotTitle: "Zones",
			plotAlt: "net pressure coefficient per roof zone for run %d: each block with U95 error bars, beside the design value",
			Zones:   true, RoofCaution: true, TapMap: true,
		}
	case rig.KindRotor:
		v := balanceView()
		v.Layout = "balance rotor" // the C_L tiles with S and rpm instead of α (style.css)
		v.plotAlt = "C_L against spin ratio for run %d, with U95 error bars"
		return v
	}
	return balanceView() // rig.KindFoil, rig.KindBody
}

// balanceView is the view of a force-balance rig: C_L(α) and the steady
// segments.
func balanceView() kindView {
	return kindView{
		Layout: "balance", Plot: "polar.svg", PlotTitle: "Polar",
		plotAlt: "C_L against angle of attack for run %d, with U95 error bars",
		Marks:   true,
	}
}

// PlotAlt is the alt text of run id's plot (for the templates).
func (v kindView) PlotAlt(id uint64) string { return fmt.Sprintf(v.plotAlt, id) }

// layouts maps every rig kind to its live-page layout, for live.js, which
// switches layout when a run of another kind starts.
func layouts() map[string]string {
	out := map[string]string{}
	for _, k := range kinds {
		out[string(k)] = viewOf(string(k)).Layout
	}
	return out
}

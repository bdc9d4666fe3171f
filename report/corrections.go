package report

import (
	"fmt"
	"strconv"
	"strings"
)

// corrections lists the corrections the run's rig file applied (weight
// tare, balance matrix, blockage), one plain sentence each, or "none" for
// each that was not applied (docs/physics.md "Corrections"). Nil when the
// rig file of the run is not known.
func (r *Report) corrections() []string {
	g := r.Rig
	if g == nil || !r.section().liftCurve && !r.section().spin {
		return nil
	}
	var out []string
	if len(g.Tare) > 0 {
		names := make([]string, len(g.Tare))
		for i, t := range g.Tare {
			names[i] = t.Channel
		}
		out = append(out, fmt.Sprintf("Weight tare against the angle, a + b·sin α + c·cos α from a flow-off sweep, subtracted from %s before the flow-off zero (budget line \"weight tare\").", strings.Join(names, ", ")))
	} else {
		out = append(out, "Weight tare against the angle: none (only the flow-off zero at the angle of the rest).")
	}
	if b := g.Balance; b != nil {
		order := "linear"
		if b.SecondOrder() {
			order = "second-order"
		}
		out = append(out, fmt.Sprintf("Balance interaction matrix (%s), outputs %s → components %s (budget line \"balance interaction matrix\").",
			order, strings.Join(b.Outputs, ", "), strings.Join(b.Components, ", ")))
	} else {
		out = append(out, "Balance interaction matrix: none (the channels are summed as they are).")
	}
	if b := g.Blockage; b != nil {
		wake := "no wake blockage"
		if b.Wake {
			wake = "wake blockage S/(4C)·C_D from each segment's drag"
		}
		out = append(out, fmt.Sprintf("Blockage (Barlow, Rae & Pope 1999, closed section): q·(1 + ε)² with solid blockage ε_sb = %s·V/C^1.5 = %s on C = %s m², and %s; u(ε) = %s %% of ε (budget line \"blockage\").",
			short(b.SolidK), sig(b.SolidEpsFrac(), 3), short(b.SectionAreaM2), wake, short(100*b.UFrac)))
	} else {
		out = append(out, "Blockage: none (free-stream q as measured).")
	}
	return out
}

// short writes a stated input as the rig file gives it (up to 4 digits).
func short(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }

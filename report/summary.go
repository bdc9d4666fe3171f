package report

import (
	"fmt"
	"strings"

	"liftyard/estimate"
	"liftyard/rig"
)

// Summary returns the report's summary in plain words: what was measured,
// the lift curve, the design verdict, and what in the record needs a look.
// Each element is one sentence.
func (r *Report) Summary() []string {
	out := r.section().count(r)
	if p := r.Polar; p != nil {
		if p.Sweeps > 1 || p.Angles < p.Points {
			out = append(out, fmt.Sprintf("The polar takes %s at %s in %s.", plural(p.Points, "point", "points"), plural(p.Angles, "angle", "angles"), plural(p.Sweeps, "sweep", "sweeps")))
		}
		out = append(out, fmt.Sprintf("Lift slope %s per rad (%s per degree), zero-lift angle %s°, fitted over %s from %s° to %s°.",
			pm(p.SlopePerRad.X, p.SlopePerRad.U95(), 3),
			pm(p.SlopePerRad.X*rig.Rad(1), p.SlopePerRad.U95()*rig.Rad(1), 4),
			pm(rig.Deg(p.AlphaZeroRad.X), rig.Deg(p.AlphaZeroRad.U95()), 2),
			plural(len(p.Linear), "point", "points"), fix(rig.Deg(p.LinearMinRad), 1), fix(rig.Deg(p.LinearMaxRad), 1)))
		if p.Stalled {
			out = append(out, fmt.Sprintf("Stall at about %s° with C_L,max = %s.", fix(rig.Deg(p.StallRad), 1), pm(p.CLMax.X, p.CLMax.U95(), 3)))
		} else {
			out = append(out, fmt.Sprintf("No stall in the measured range; the largest C_L measured is %s at %s°.", pm(p.CLMax.X, p.CLMax.U95(), 3), fix(rig.Deg(p.AlphaCLMaxRad), 1)))
		}
		if h, ok := p.MaxHysteresis(); ok {
			out = append(out, capital(h.Describe())+".")
		}
	} else if r.PolarProblem != "" {
		out = append(out, capital(r.PolarProblem)+".")
	}
	if c := r.Comparison; c != nil {
		compared := c.Agree + c.Disagree
		switch {
		case compared == 0:
			out = append(out, "The design curve covers none of the measured points: no comparison.")
		default:
			s := fmt.Sprintf("Agrees with the design at %d of %s", c.Agree, plural(compared, "compared point", "compared points"))
			if c.Disagree > 0 && len(c.Reasons) > 1 {
				s += "; " + c.Reasons[1]
			}
			out = append(out, s+".")
		}
		if c.Outside > 0 {
			out = append(out, fmt.Sprintf("%s outside the design curve's angle range (not compared).", plural(c.Outside, "point lies", "points lie")))
		}
	} else if r.DesignProblem != "" {
		out = append(out, "No design comparison: "+r.DesignProblem+".")
	} else if r.Rig != nil && r.Rig.Lift.Design == "" && r.section().design {
		out = append(out, "The rig file names no design curve ([lift] design): no design comparison.")
	}
	out = append(out, r.healthSentence())
	if s := r.loadSentence(); s != "" {
		out = append(out, s)
	}
	expired, missing := 0, 0
	for _, c := range r.Calibrations {
		switch {
		case c.Missing != "":
			missing++
		case c.Expired:
			expired++
		}
	}
	if expired > 0 {
		out = append(out, fmt.Sprintf("Warning: %s had expired when the run started.", plural(expired, "stored calibration used", "stored calibrations used")))
	}
	if missing > 0 {
		out = append(out, fmt.Sprintf("Warning: %s cannot be found in the store.", plural(missing, "calibration used", "calibrations used")))
	}
	if r.Run.Status != "complete" {
		out = append(out, fmt.Sprintf("The run's status is %q: it did not end normally.", string(r.Run.Status)))
	}
	return out
}

// withCL counts the segments with a lift coefficient.
func (r *Report) withCL() int {
	n := 0
	for _, s := range r.Segments {
		if measured(s.CL) {
			n++
		}
	}
	return n
}

// balanceCount opens the summary of a force-balance run: how many steady
// segments, over which angles.
func balanceCount(r *Report) []string {
	n := r.withCL()
	lo, hi := r.AlphaRangeDeg()
	switch {
	case len(r.Segments) == 0:
		return []string{noSegments}
	case n > 0:
		return []string{fmt.Sprintf("%s from %s° to %s°.", plural(n, "steady segment", "steady segments"), fix(lo, 1), fix(hi, 1))}
	}
	return []string{fmt.Sprintf("%s, none with a lift coefficient.", plural(len(r.Segments), "steady segment", "steady segments"))}
}

const noSegments = "No steady segments were found in this run, so there are no coefficients to report."

// healthSentence sums the source counters in one sentence.
func (r *Report) healthSentence() string {
	if len(r.Sources) == 0 {
		return "No source health was recorded."
	}
	var rejected, gaps, dropped, reconnects uint64
	for _, h := range r.Sources {
		rejected += h.Rejected
		gaps += h.Gaps
		dropped += h.SamplesDropped
		reconnects += h.Reconnects
	}
	if rejected+gaps+dropped+reconnects == 0 {
		return "The sources were clean: no frame rejected, no gap, no sample dropped, no reconnect."
	}
	var parts []string
	for _, c := range []struct {
		n         uint64
		one, many string
	}{{rejected, "frame rejected", "frames rejected"}, {gaps, "gap", "gaps"}, {dropped, "sample dropped", "samples dropped"}, {reconnects, "reconnect", "reconnects"}} {
		if c.n > 0 {
			parts = append(parts, plural(int(c.n), c.one, c.many))
		}
	}
	return "Source health: " + strings.Join(parts, ", ") + " (see Health)."
}

// loadSentence names the most loaded rated channel and any overload.
func (r *Report) loadSentence() string {
	if len(r.Loads) == 0 {
		return ""
	}
	top := r.Loads[0]
	var alarms, warns uint64
	for _, l := range r.Loads {
		if l.MaxFrac > top.MaxFrac {
			top = l
		}
		alarms += l.Alarms
		warns += l.Warnings
	}
	s := fmt.Sprintf("Largest load: %s of rated capacity (%s).", pct(top.MaxFrac), top.Channel)
	switch {
	case alarms > 0:
		s += fmt.Sprintf(" OVERLOAD: %s at or above 100 %% of capacity: inspect the rig and its load cells before further use.", plural(int(alarms), "sample", "samples"))
	case warns > 0:
		s += fmt.Sprintf(" %s at or above the 80 %% warning level.", capital(plural(int(warns), "sample", "samples")))
	}
	return s
}

func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return fmt.Sprintf("%d %s", n, many)
}

func capital(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

// verdictWord is a short label for a comparison verdict.
func verdictWord(c *estimate.Comparison) string {
	switch c.Verdict {
	case estimate.VerdictAgrees:
		return "the measurement agrees with the design"
	case estimate.VerdictDisagrees:
		return "the measurement disagrees with the design"
	}
	return "no comparison: the design covers none of the points"
}

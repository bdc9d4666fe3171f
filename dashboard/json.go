package dashboard

import (
	"fmt"
	"math"
	"strconv"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// num is a float64 that encodes as JSON null when it is NaN or infinite
// (encoding/json refuses those), so one missing quantity never hides the
// rest of an estimate.
type num float64

func (n num) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

// UnmarshalJSON reads null back as NaN, so a decoded estimate shows "—"
// where the published one had no value.
func (n *num) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*n = num(math.NaN())
		return nil
	}
	f, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return fmt.Errorf("number %q: %w", b, err)
	}
	*n = num(f)
	return nil
}

// measured reports whether v holds a measurement: the zero Value means "not
// measured" (calibrate.Value doc) and NaN means "could not be computed".
func measured(v calibrate.Value) bool {
	if v == (calibrate.Value{}) {
		return false
	}
	return !math.IsNaN(v.X) && !math.IsInf(v.X, 0)
}

// x returns v.X, or NaN (null in JSON) when v holds no measurement.
func x(v calibrate.Value) num {
	if !measured(v) {
		return num(math.NaN())
	}
	return num(v.X)
}

// u95 returns the expanded uncertainty of v, or NaN when v holds no
// measurement.
func u95(v calibrate.Value) num {
	if !measured(v) {
		return num(math.NaN())
	}
	return num(v.U95())
}

// deg converts an angle for display; NaN passes through.
func deg(n num) num { return num(rig.Deg(float64(n))) }

// froude shows the Froude number, which estimate leaves at 0 where it does
// not apply (air rigs), as null.
func froude(fn float64) num {
	if fn == 0 {
		return num(math.NaN())
	}
	return num(fn)
}

// liveJSON is the wire form of an estimate.Live: Go field names in
// snake_case with the unit suffix, angles in degrees, uncertainties expanded
// to 95 % coverage.
type liveJSON struct {
	T           time.Time `json:"t"`
	WindowS     num       `json:"window_s"`
	N           int       `json:"n"`
	QPa         num       `json:"q_pa"`
	QU95Pa      num       `json:"q_u95_pa"`
	SpeedMS     num       `json:"speed_m_s"`
	SpeedU95MS  num       `json:"speed_u95_m_s"`
	AlphaDeg    num       `json:"alpha_deg"`
	AlphaU95Deg num       `json:"alpha_u95_deg"`
	CL          num       `json:"cl"`
	CLU95       num       `json:"cl_u95"`
	CD          num       `json:"cd"`
	CDU95       num       `json:"cd_u95"`
	Re          num       `json:"re"`
	Fn          num       `json:"fn"` // Froude number, water rigs; null otherwise
	RhoKgM3     num       `json:"rho_kg_m3"`
	LiftN       num       `json:"lift_n"`
	LiftU95N    num       `json:"lift_u95_n"`
	DragN       num       `json:"drag_n"`
	DragU95N    num       `json:"drag_u95_n"`
	Steady      bool      `json:"steady"`
	Segments    int       `json:"segments"`
	Warnings    []string  `json:"warnings"`
	// Zones is each roof zone over the window (roof rigs only; absent
	// otherwise).
	Zones []zoneLiveJSON `json:"zones,omitempty"`
}

// zoneLiveJSON is the wire form of an estimate.ZoneLive: the zone's net
// pressure coefficient over the live window (negative = uplift), its most
// negative sample, the design value and the normalised error. Agrees is
// |En| ≤ 1, null without a design value.
type zoneLiveJSON struct {
	Zone        string `json:"zone"`
	CpMean      num    `json:"cp_mean"`
	CpU95       num    `json:"cp_u95"`
	CpMin       num    `json:"cp_min"`
	DesignCp    num    `json:"design_cp"`
	DesignCpU95 num    `json:"design_cp_u95"`
	En          num    `json:"en"`
	Agrees      *bool  `json:"agrees"`
}

// agrees is |en| ≤ 1 (DESIGN §4 "Comparison"), nil when en is not a number.
func agrees(en float64) *bool {
	if math.IsNaN(en) || math.IsInf(en, 0) {
		return nil
	}
	ok := math.Abs(en) <= 1
	return &ok
}

func toZonesJSON(zs []estimate.ZoneLive) []zoneLiveJSON {
	if len(zs) == 0 {
		return nil
	}
	out := make([]zoneLiveJSON, len(zs))
	for i, z := range zs {
		en := z.En
		if !measured(z.DesignCp) {
			en = math.NaN()
		}
		out[i] = zoneLiveJSON{
			Zone: z.Zone, CpMean: x(z.CpMean), CpU95: u95(z.CpMean), CpMin: num(z.CpMin),
			DesignCp: x(z.DesignCp), DesignCpU95: u95(z.DesignCp), En: num(en), Agrees: agrees(en),
		}
	}
	return out
}

func toLiveJSON(l estimate.Live) liveJSON {
	w := l.Warnings
	if w == nil {
		w = []string{}
	}
	return liveJSON{
		T:           l.T,
		WindowS:     num(l.Window.Seconds()),
		N:           l.N,
		QPa:         x(l.QPa),
		QU95Pa:      u95(l.QPa),
		SpeedMS:     x(l.SpeedMPerS),
		SpeedU95MS:  u95(l.SpeedMPerS),
		AlphaDeg:    deg(x(l.AlphaRad)),
		AlphaU95Deg: deg(u95(l.AlphaRad)),
		CL:          x(l.CL),
		CLU95:       u95(l.CL),
		CD:          x(l.CD),
		CDU95:       u95(l.CD),
		Re:          num(l.Re),
		Fn:          froude(l.Fn),
		RhoKgM3:     num(l.RhoKgPerM3),
		LiftN:       x(l.LiftN),
		LiftU95N:    u95(l.LiftN),
		DragN:       x(l.DragN),
		DragU95N:    u95(l.DragN),
		Steady:      l.Steady,
		Segments:    l.Segments,
		Warnings:    w,
		Zones:       toZonesJSON(l.Zones),
	}
}

// segmentJSON is the wire form of an estimate.Segment, with the field names
// of the segment export (DESIGN §3.4).
type segmentJSON struct {
	Run         uint64    `json:"run"`
	Segment     int       `json:"segment"`
	TStart      time.Time `json:"t_start"`
	TEnd        time.Time `json:"t_end"`
	N           int       `json:"n"`
	NEff        num       `json:"n_eff"`
	AlphaDeg    num       `json:"alpha_deg"`
	AlphaU95Deg num       `json:"alpha_u95_deg"`
	QPa         num       `json:"q_pa"`
	QU95Pa      num       `json:"q_u95_pa"`
	SpeedMS     num       `json:"speed_m_s"`
	SpeedU95MS  num       `json:"speed_u95_m_s"`
	RhoKgM3     num       `json:"rho_kg_m3"`
	MuPaS       num       `json:"mu_pa_s"`
	Re          num       `json:"re"`
	Fn          num       `json:"fn"` // Froude number, water rigs; null otherwise
	LiftN       num       `json:"lift_n"`
	LiftU95N    num       `json:"lift_u95_n"`
	DragN       num       `json:"drag_n"`
	DragU95N    num       `json:"drag_u95_n"`
	CL          num       `json:"cl"`
	CLU95       num       `json:"cl_u95"`
	CD          num       `json:"cd"`
	CDU95       num       `json:"cd_u95"`
	SpinRatio   num       `json:"spin_ratio"`
	DesignCL    num       `json:"design_cl"`
	DesignCLU95 num       `json:"design_cl_u95"`
	En          num       `json:"en"`
	// Roof rows only (one zone in one block); absent on other rows.
	*roofSegmentJSON
}

// roofSegmentJSON is the roof part of a segment row, named as in the
// segment export: the zone's net Cp mean with U95, its rms over the block,
// the Gumbel peak, the mean net force (negative = upward) and the design
// value. En in the row compares cp_mean with design_cp.
type roofSegmentJSON struct {
	Zone        string `json:"zone"`
	CpMean      num    `json:"cp_mean"`
	CpU95       num    `json:"cp_u95"`
	CpRMS       num    `json:"cp_rms"`
	CpPeak      num    `json:"cp_peak"`
	UpliftN     num    `json:"uplift_n"`
	UpliftU95N  num    `json:"uplift_u95_n"`
	DesignCp    num    `json:"design_cp"`
	DesignCpU95 num    `json:"design_cp_u95"`
	Agrees      *bool  `json:"agrees"`
}

func toSegmentJSON(run uint64, s estimate.Segment) segmentJSON {
	j := toBalanceSegmentJSON(run, s)
	if s.Zone != "" {
		en := s.En
		if !measured(s.DesignCp) {
			en = math.NaN()
		}
		j.En = num(en)
		j.roofSegmentJSON = &roofSegmentJSON{
			Zone: s.Zone, CpMean: x(s.CpMean), CpU95: u95(s.CpMean), CpRMS: num(s.CpRMS), CpPeak: num(s.CpPeak),
			UpliftN: x(s.UpliftN), UpliftU95N: u95(s.UpliftN), DesignCp: x(s.DesignCp), DesignCpU95: u95(s.DesignCp),
			Agrees: agrees(en),
		}
	}
	return j
}

func toBalanceSegmentJSON(run uint64, s estimate.Segment) segmentJSON {
	return segmentJSON{
		Run:         run,
		Segment:     s.Index,
		TStart:      s.TStart,
		TEnd:        s.TEnd,
		N:           s.N,
		NEff:        num(s.NEff),
		AlphaDeg:    deg(x(s.AlphaRad)),
		AlphaU95Deg: deg(u95(s.AlphaRad)),
		QPa:         x(s.QPa),
		QU95Pa:      u95(s.QPa),
		SpeedMS:     x(s.SpeedMPerS),
		SpeedU95MS:  u95(s.SpeedMPerS),
		RhoKgM3:     num(s.RhoKgPerM3),
		MuPaS:       num(s.MuPaS),
		Re:          num(s.Re),
		Fn:          froude(s.Fn),
		LiftN:       x(s.LiftN),
		LiftU95N:    u95(s.LiftN),
		DragN:       x(s.DragN),
		DragU95N:    u95(s.DragN),
		CL:          x(s.CL),
		CLU95:       u95(s.CL),
		CD:          x(s.CD),
		CDU95:       u95(s.CD),
		SpinRatio:   num(s.SpinRatio),
		DesignCL:    x(s.DesignCL),
		DesignCLU95: u95(s.DesignCL),
		En:          num(s.En),
	}
}

// runJSON is a storage.Run with its duration, which the run list shows.
type runJSON struct {
	storage.Run
	DurationS num `json:"duration_s"`
}

// runDuration is the run's length: to its end, or to now while it records.
func runDuration(r storage.Run, now time.Time) time.Duration {
	if r.Started.IsZero() {
		return 0
	}
	end := r.Ended
	if end.IsZero() {
		if r.Status != storage.StatusRecording {
			return 0
		}
		end = now
	}
	if end.Before(r.Started) {
		return 0
	}
	return end.Sub(r.Started)
}

func toRunJSON(r storage.Run, now time.Time) runJSON {
	if r.Sources == nil {
		r.Sources = []acquire.HealthSnapshot{}
	}
	return runJSON{Run: r, DurationS: num(runDuration(r, now).Seconds())}
}

// EncodeLive returns a live estimate as the JSON of GET /api/v1/live, the
// one public form of live results (also published to a site broker).
func EncodeLive(l estimate.Live) []byte { return mustJSON(toLiveJSON(l)) }

// EncodeSegment returns a segment result of run as the JSON of the API's
// segment rows.
func EncodeSegment(run uint64, s estimate.Segment) []byte { return mustJSON(toSegmentJSON(run, s)) }

// EncodeHealth returns a health report as the JSON of GET /api/v1/health.
func EncodeHealth(h Health) []byte { return mustJSON(h) }

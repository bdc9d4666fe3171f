package dashboard

import (
	"fmt"
	"math"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
	"liftyard/storage"
)

// num is the one NaN-safe JSON number of liftyard (estimate.Num): NaN is
// null, so one missing quantity never hides the rest of an estimate, and
// null reads back as NaN, shown as "—".
type num = estimate.Num

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
	// SpinRatio (± SpinRatioU95) and SpinRPM are a rotor's spin ratio
	// and spin over the window (issue 12); absent for other kinds.
	SpinRatio    *num     `json:"spin_ratio,omitempty"`
	SpinRatioU95 *num     `json:"spin_ratio_u95,omitempty"`
	SpinRPM      *num     `json:"spin_rpm,omitempty"`
	Steady       bool     `json:"steady"`
	Segments     int      `json:"segments"`
	Warnings     []string `json:"warnings"`
	// Zones is each roof zone over the window (roof rigs only; absent
	// otherwise).
	Zones []zoneLiveJSON `json:"zones,omitempty"`
	// DirectionDeg and DirectionSpreadDeg are a roof's wind direction over
	// the window (circular mean and spread, degrees from north); absent on
	// force-balance rigs, null without a vane.
	DirectionDeg       *num `json:"direction_deg,omitempty"`
	DirectionSpreadDeg *num `json:"direction_spread_deg,omitempty"`
	// TemperatureC is the fluid temperature behind ρ and Re; measured by
	// the rig's temperature channel, or the rig's fixed value. Null where
	// not given (roof rigs).
	TemperatureC        num  `json:"temperature_c"`
	TemperatureMeasured bool `json:"temperature_measured"`
	FlowOff             bool `json:"flow_off"`
	// Withheld says why cl and cd are null (flow off, or before the run's
	// first steady window); absent when they are given.
	Withheld string `json:"withheld,omitempty"`
	// The data-age clock: Computed is the host time of this estimate,
	// AgeS the age then of the oldest source's newest block (the age of
	// the values), Sources each source's clock; Stale says a source is
	// silent past its limit and the values are frozen.
	Computed time.Time       `json:"computed,omitzero"`
	AgeS     num             `json:"age_s"`
	Stale    bool            `json:"stale"`
	Sources  []sourceAgeJSON `json:"sources"`
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

// agrees is estimate.Agrees (|en| ≤ 1), nil when en is not a number.
func agrees(en float64) *bool {
	a, ok := estimate.Agrees(en)
	if !ok {
		return nil
	}
	return &a
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
	out := liveJSON{
		T:           l.T.UTC(),
		WindowS:     num(l.Window.Seconds()),
		N:           l.N,
		QPa:         x(l.QPa),
		QU95Pa:      u95(l.QPa),
		SpeedMS:     x(l.SpeedMPerS),
		SpeedU95MS:  u95(l.SpeedMPerS),
		AlphaDeg:    num(rig.Deg(float64(x(l.AlphaRad)))),
		AlphaU95Deg: num(rig.Deg(float64(u95(l.AlphaRad)))),
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

		TemperatureC:        tempC(l.TempK),
		TemperatureMeasured: l.TempMeasured,
		FlowOff:             l.FlowOff,
		Withheld:            l.Withheld,
		Computed:            l.Computed.UTC(),
		AgeS:                oldestAge(l.Sources),
		Stale:               l.Stale,
		Sources:             agesJSON(l.Sources),
	}
	if l.SpinRatio != (calibrate.Value{}) {
		s, u, rpm := num(l.SpinRatio.X), u95(l.SpinRatio), num(l.OmegaRadPerS*60/(2*math.Pi)) // rad/s → rpm for display
		out.SpinRatio, out.SpinRatioU95, out.SpinRPM = &s, &u, &rpm
	}
	if len(l.Zones) > 0 {
		d, sp := num(rig.Deg(l.DirectionRad)), num(rig.Deg(l.DirectionSpreadRad))
		out.DirectionDeg, out.DirectionSpreadDeg = &d, &sp
	}
	return out
}

// tempC shows a temperature in °C, null when not given (0 K).
func tempC(tK float64) num {
	if !(tK > 0) {
		return num(math.NaN())
	}
	return num(tK - 273.15) // ITS-90: t/°C = T/K − 273.15
}

// oldestAge is the largest age of the sources' newest blocks, in s; null
// without sources.
func oldestAge(as []acquire.SourceAge) num {
	if len(as) == 0 {
		return num(math.NaN())
	}
	var a time.Duration
	for _, s := range as {
		a = max(a, s.Age)
	}
	return num(a.Seconds())
}

// segmentJSON is one result row as the API (/api/v1/runs/{id}/segments),
// the live stream, the MQTT segment message and the run page show it. Its
// JSON is the row itself (estimate.Row, rendered from the result column
// table: inapplicable and missing fields absent). The other fields are the
// row's values read back by column name for the templates and plots, NaN
// where the row has none (shown as "—").
type segmentJSON struct {
	row     estimate.Row
	Segment int
	TStart  time.Time
	N       int

	NEff, AlphaDeg, AlphaU95Deg, QPa, QU95Pa, SpeedMS, Re, CL, CLU95, CD, CDU95 num
	SpinRatio, DesignCL, DesignCLU95, En                                        num

	roof *roofView // roof rows only
}

// roofView is the roof part of a segment row for the templates and the
// zone plot: the zone's net Cp mean with U95, its rms over the block, the
// block peak, the mean net force (negative = upward) and the design value.
type roofView struct {
	Zone, Tap, Block                                                         string
	DirectionDeg, DirectionSpreadDeg, CpPeakMax                              num
	SectorLeft                                                               bool
	CpMean, CpU95, CpRMS, CpPeak, UpliftN, UpliftU95N, DesignCp, DesignCpU95 num
	Agrees                                                                   *bool // nil without a design value
}

// MarshalJSON writes the row (estimate.Row.MarshalJSON).
func (s segmentJSON) MarshalJSON() ([]byte, error) { return s.row.MarshalJSON() }

// UnmarshalJSON reads a row written by MarshalJSON, e.g. a segment kept by
// the live hub.
func (s *segmentJSON) UnmarshalJSON(b []byte) error {
	var r estimate.Row
	if err := r.UnmarshalJSON(b); err != nil {
		return err
	}
	*s = segmentView(r)
	return nil
}

// segmentView reads the display fields of a row.
func segmentView(r estimate.Row) segmentJSON {
	f := func(name string) num { return num(r.Float(name)) }
	integer := func(name string) int {
		v, _ := r.Value(name)
		i, _ := v.(int64)
		return int(i)
	}
	s := segmentJSON{
		row: r, Segment: integer("segment"), N: integer("n"),
		NEff: f("n_eff"), AlphaDeg: f("alpha_deg"), AlphaU95Deg: f("alpha_u95_deg"), QPa: f("q_pa"), QU95Pa: f("q_u95_pa"),
		SpeedMS: f("speed_m_s"), Re: f("re"), CL: f("cl"), CLU95: f("cl_u95"), CD: f("cd"), CDU95: f("cd_u95"),
		SpinRatio: f("spin_ratio"), DesignCL: f("design_cl"), DesignCLU95: f("design_cl_u95"), En: f("en"),
	}
	if v, ok := r.Value("t_start"); ok {
		s.TStart, _ = v.(time.Time)
	}
	if r.Kind() == rig.KindRoof {
		zone, _ := r.Value("zone")
		rv := &roofView{
			CpMean: f("cp_mean"), CpU95: f("cp_u95"), CpRMS: f("cp_rms"), CpPeak: f("cp_peak"),
			UpliftN: f("uplift_n"), UpliftU95N: f("uplift_u95_n"), DesignCp: f("design_cp"), DesignCpU95: f("design_cp_u95"),
		}
		rv.Zone, _ = zone.(string)
		if tap, ok := r.Value("tap"); ok {
			rv.Tap, _ = tap.(string)
		}
		rv.Block = "#" + fmt.Sprint(s.Segment)
		if b, ok := r.Value("block"); ok {
			rv.Block = fmt.Sprint(b.(int64) + 1)
		}
		rv.DirectionDeg, rv.DirectionSpreadDeg, rv.CpPeakMax = f("direction_deg"), f("direction_spread_deg"), f("cp_peak_max")
		if v, ok := r.Value("sector_left"); ok {
			rv.SectorLeft, _ = v.(bool)
		}
		if v, ok := r.Value("agrees"); ok {
			a, _ := v.(bool)
			rv.Agrees = &a
		}
		s.roof = rv
	}
	return s
}

// toSegmentJSON renders segment s of run; the row's kind is s.Kind (set by
// the estimator), else guessed from its fields (estimate.KindOf).
func toSegmentJSON(run uint64, s estimate.Segment) segmentJSON {
	return toSegmentRow(run, "", s)
}

// toSegmentRow renders segment s of a run of rig kind kind.
func toSegmentRow(run uint64, kind rig.Kind, s estimate.Segment) segmentJSON {
	return segmentView(estimate.NewRow(run, kind, &s))
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
	// One time format everywhere: RFC 3339 in UTC.
	r.Started, r.Ended = r.Started.UTC(), r.Ended.UTC()
	return runJSON{Run: r, DurationS: num(runDuration(r, now).Seconds())}
}

// EncodeLive returns a live estimate as the JSON of GET /api/v1/live, the
// one public form of live results (also published to a site broker).
func EncodeLive(l estimate.Live) []byte { return mustJSON(toLiveJSON(l)) }

// EncodeSegment returns a segment result of run as the JSON of the API's
// segment rows (the result column table, estimate.Columns): the MQTT segment
// message.
func EncodeSegment(run uint64, s estimate.Segment) []byte { return mustJSON(toSegmentJSON(run, s)) }

// EncodeHealth returns a health report as the JSON of GET /api/v1/health.
func EncodeHealth(h Health) []byte { return mustJSON(h.judged()) }

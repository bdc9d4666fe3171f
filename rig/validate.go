package rig

import (
	"fmt"
	"math"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
)

// Validate checks a Rig built in code (Parse already runs these checks on
// files): names are unique and well formed, every reference names a channel
// of the right quantity, the kind has what it needs, and every number is in
// range. It returns Errors without file positions, or nil.
func (r *Rig) Validate() error {
	d := &decoder{file: noFile, reported: map[string]bool{}}
	validate(r, d)
	if len(d.errs) > 0 {
		return d.errs
	}
	return nil
}

// nameRE is what a channel, source, tap or zone name may hold: names travel
// as CSV headers, JSON keys and URL parts, so no blanks or punctuation.
var nameRE = regexp.MustCompile(`^[A-Za-z0-9_.-]{1,64}$`)

// validate adds every cross-check problem of r to d.
func validate(r *Rig, d *decoder) {
	v := &validator{r: r, d: d, chans: map[string]int{}}
	v.top()
	v.conditions()
	v.reference()
	v.channels()
	v.sources()
	v.lift()
	v.roof()
	v.publish()
	v.corrections()
}

// publish checks the [publish] table's broker URL.
func (v *validator) publish() {
	p := v.r.Publish
	if p == nil || p.Broker == "" {
		return
	}
	if brokerUserInfo(p.Broker) {
		v.add("publish.broker", ErrValue, "publish: "+brokerUserInfoMsg)
	} else if !validBroker(p.Broker) {
		v.add("publish.broker", ErrValue, `publish: broker %q needs a scheme, host and port, like "tcp://site-broker:1883"`, p.Broker)
	}
}

type validator struct {
	r     *Rig
	d     *decoder
	chans map[string]int // channel name → index of its first definition
}

func (v *validator) add(path string, kind error, format string, args ...any) {
	v.d.add(path, kind, format, args...)
}

// firstLine says where an earlier definition is, when the file tells.
func (v *validator) firstLine(path string) string {
	if p := v.d.idx.at(path); p.line > 0 {
		return fmt.Sprintf(" (first on line %d)", p.line)
	}
	return ""
}

func (v *validator) top() {
	r := v.r
	if r.Name == "" {
		v.add("name", ErrMissing, `name missing (add name = "..." at the top of the file, before any [table])`)
	}
	if r.Kind == "" {
		v.add("kind", ErrMissing, `kind missing (add kind = "foil", "roof", "rotor" or "body" at the top of the file)`)
	} else if !slices.Contains(kindWords, string(r.Kind)) {
		v.add("kind", ErrValue, `kind %q is not known (use "foil", "roof", "rotor" or "body")`, r.Kind)
	}
	if r.Fluid == "" {
		v.add("fluid", ErrMissing, `fluid missing (add fluid = "air", "fresh_water" or "sea_water" at the top of the file)`)
	} else if !slices.Contains(fluidWords, string(r.Fluid)) {
		v.add("fluid", ErrValue, `fluid %q is not known (use "air", "fresh_water" or "sea_water")`, r.Fluid)
	}
}

func (v *validator) conditions() {
	c := v.r.Conditions
	switch {
	case !finite(c.TempK) || c.TempK <= 0:
		v.add("conditions.temperature_c", ErrValue, "conditions: temperature %.2f °C is at or below absolute zero", c.TempK-273.15)
	case v.r.Fluid != FluidAir && v.r.Fluid != "" && (c.TempK < 273.15-2.5 || c.TempK > 273.15+100):
		v.add("conditions.temperature_c", ErrValue, "conditions: water at %.2f °C is outside liquid water (0 to 100 °C)", c.TempK-273.15)
	}
	if !finite(c.PressurePa) || c.PressurePa <= 0 {
		v.add("conditions.pressure_pa", ErrValue, "conditions: pressure_pa must be > 0 (absolute ambient pressure; sea level is 101325)")
	}
	if !finite(c.RelHumidity) || c.RelHumidity < 0 || c.RelHumidity > 1 {
		v.add("conditions.humidity_pct", ErrValue, "conditions: humidity_pct must be within 0 to 100, not %g", c.RelHumidity*100)
	} else if c.RelHumidity > 0 && v.r.Fluid != FluidAir && v.r.Fluid != "" {
		v.add("conditions.humidity_pct", ErrValue, "conditions: humidity_pct applies to air only (remove it for %s)", v.r.Fluid)
	}
	switch s := c.SalinityKgPerKg; {
	case !finite(s) || s < 0 || s > 0.05:
		v.add("conditions.salinity_g_per_kg", ErrValue, "conditions: salinity_g_per_kg must be within 0 to 50, not %g (standard seawater is 35.16504)", s*1000)
	case s > 0 && v.r.Fluid != FluidSeaWater && v.r.Fluid != "":
		v.add("conditions.salinity_g_per_kg", ErrValue, `conditions: salinity_g_per_kg applies to sea water only (set fluid = "sea_water", or remove it)`)
	}
}

func (v *validator) reference() {
	ref, kind := v.r.Reference, v.r.Kind
	switch {
	case !finite(ref.AreaM2) || ref.AreaM2 < 0 || (ref.AreaM2 == 0 && v.present("reference.area_m2")):
		v.add("reference.area_m2", ErrValue, "reference: area_m2 must be > 0, not %g", ref.AreaM2)
	case ref.AreaM2 > MaxAreaM2:
		v.add("reference.area_m2", ErrValue, "reference: area_m2 = %g m² is not plausible (more than %g m²); give the area in m²", ref.AreaM2, float64(MaxAreaM2))
	case ref.AreaM2 == 0 && kind != KindRoof && kind != "":
		v.add("reference.area_m2", ErrMissing, "reference: area_m2 missing (add [reference] area_m2 = the %s area that coefficients are made on, in m²)", defaultAreaKind(kind))
	}
	if !finite(ref.AreaUM2) || ref.AreaUM2 < 0 {
		v.add("reference.area_u_m2", ErrValue, "reference: area_u_m2 must be ≥ 0 (a standard uncertainty), not %g", ref.AreaUM2)
	} else if ref.AreaM2 > 0 && ref.AreaUM2 >= ref.AreaM2 {
		v.add("reference.area_u_m2", ErrValue, "reference: area_u_m2 = %g m² is not smaller than area_m2 = %g m²", ref.AreaUM2, ref.AreaM2)
	}
	for _, f := range []struct {
		key string
		val float64
	}{{"length_m", ref.LengthM}, {"span_m", ref.SpanM}, {"radius_m", ref.RadiusM}} {
		if !finite(f.val) || f.val < 0 {
			v.add("reference."+f.key, ErrValue, "reference: %s must be > 0, not %g", f.key, f.val)
		}
	}
	if kind == KindFoil && ref.LengthM == 0 {
		v.add("reference.length_m", ErrMissing, "reference: length_m missing (add length_m = the chord in m, for the Reynolds number and C_M)")
	}
	if !finite(ref.RadiusUM) || ref.RadiusUM < 0 {
		v.add("reference.radius_u_m", ErrValue, "reference: radius_u_m must be ≥ 0 (a standard uncertainty), not %g", ref.RadiusUM)
	} else if ref.RadiusUM > 0 && ref.RadiusUM >= ref.RadiusM {
		v.add("reference.radius_u_m", ErrValue, "reference: radius_u_m = %g m is not smaller than radius_m = %g m", ref.RadiusUM, ref.RadiusM)
	}
	if kind == KindRotor && ref.RadiusM == 0 {
		v.add("reference.radius_m", ErrMissing, "reference: radius_m missing (add radius_m = the rotor radius in m, for the spin ratio ωR/V)")
	}
}

// checkName reports a missing, malformed or repeated name of an item.
func (v *validator) checkName(kind, path, name string, seen map[string]int, i int) {
	switch {
	case name == "":
		v.add(path+".name", ErrMissing, "[[%s]] #%d: name missing (add name = \"...\")", kind, i+1)
	case !nameRE.MatchString(name):
		v.add(path+".name", ErrValue, "%s %q: a name may hold letters, digits, _ . and - only (up to 64)", kind, name)
	default:
		if j, dup := seen[name]; dup {
			v.add(path+".name", ErrDuplicate, "%s %q is defined twice%s", kind, name, v.firstLine(indexPath(kind, j)))
			return
		}
		seen[name] = i
	}
}

func (v *validator) channels() {
	for i, c := range v.r.Channels {
		p := indexPath("channel", i)
		v.checkName("channel", p, c.Name, v.chans, i)
		subj := itemName("channel", i, c.Name)
		switch {
		case c.Quantity == "":
			v.add(p+".quantity", ErrMissing, "%s: quantity missing (add quantity = one of %s)", subj, orList(quantityWords()))
		case !c.Quantity.Known():
			v.add(p+".quantity", ErrValue, "%s: quantity %q is not known (use %s)", subj, c.Quantity, orList(quantityWords()))
		}
		unit := c.Unit
		if c.Quantity.Known() {
			if c.Unit == "" {
				v.add(p+".unit", ErrMissing, "%s: unit missing (add unit = %q, the unit the calibration produces; %s also work)", subj, c.Quantity.SIUnit(), orList(Units(c.Quantity)[1:]))
				unit = c.Quantity.SIUnit()
			} else if _, err := UnitToSI(c.Quantity, c.Unit); err != nil {
				v.add(p+".unit", ErrUnit, "%s: %v", subj, err)
				unit = c.Quantity.SIUnit()
			}
		}
		switch {
		case !finite(c.CapacitySI) || c.CapacitySI < 0:
			v.add(p+".capacity", ErrValue, "%s: capacity must be > 0", subj)
		case c.CapacitySI == 0 && (c.Quantity == QuantityForce || c.Quantity == QuantityMoment || c.Quantity == QuantityPressure):
			v.add(p+".capacity", ErrMissing, "%s: capacity missing (add capacity = \"500 %s\", the sensor's rated range, for the overload warning)", subj, unit)
		}
		v.calibration(p, subj, unit, c.Calibration)
	}
}

func (v *validator) calibration(p, subj, unit string, cal Calibration) {
	cp := p + ".calibration"
	switch {
	case cal.ID == "" && cal.Poly == nil:
		v.add(cp, ErrMissing, "%s: calibration missing (add calibration = { poly = [c0, c1], u = ... } giving %s from the raw reading, or { id = \"...\" } for a stored calibration)", subj, unit)
		return
	case cal.ID != "" && cal.Poly != nil:
		v.add(cp+".id", ErrValue, "%s: calibration has both id and poly (keep one)", subj)
		return
	case cal.ID != "":
		return
	}
	if len(cal.Poly) == 0 {
		v.add(cp+".poly", ErrValue, "%s: calibration poly needs at least one coefficient, like [c0, c1]", subj)
	}
	for k, c := range cal.Poly {
		if !finite(c) {
			v.add(fmt.Sprintf("%s.poly[%d]", cp, k), ErrValue, "%s: calibration poly[%d] must be a finite number", subj, k)
		}
	}
	if !finite(cal.U) || cal.U < 0 {
		v.add(cp+".u", ErrValue, "%s: calibration u must be ≥ 0 (a standard uncertainty in %s), not %g", subj, unit, cal.U)
	}
}

func itemName(kind string, i int, name string) string {
	if name == "" {
		return fmt.Sprintf("[[%s]] #%d", kind, i+1)
	}
	return fmt.Sprintf("%s %q", kind, Excerpt(name))
}

// ref checks that name is a defined channel of quantity want.
func (v *validator) ref(path, subj, role, name string, want Quantity) {
	i, ok := v.chans[name]
	if !ok {
		hint := ""
		names := make([]string, 0, len(v.chans))
		for n := range v.chans {
			names = append(names, n)
		}
		slices.Sort(names)
		if s := suggest(name, names); s != "" {
			hint = fmt.Sprintf("; did you mean %q?", s)
		}
		v.add(path, ErrReference, "%s: %s names channel %q, which is not defined (define it under [[channel]]%s)", subj, role, name, hint)
		return
	}
	c := v.r.Channels[i]
	if want != "" && c.Quantity.Known() && c.Quantity != want {
		v.add(path, ErrReference, "%s: %s needs a %s channel, but %q measures %s", subj, role, want, name, c.Quantity)
	}
}

func (v *validator) sources() {
	seen := map[string]int{}
	ports := map[string]int{}
	readBy := map[string]string{}
	for i, s := range v.r.Sources {
		p := indexPath("source", i)
		v.checkName("source", p, s.Name, seen, i)
		subj := itemName("source", i, s.Name)
		switch s.Type {
		case "":
			v.add(p+".type", ErrMissing, `%s: type missing (add type = "serial", "mqtt" or "simulated")`, subj)
		case SourceSerial:
			if s.Port == "" {
				v.add(p+".port", ErrMissing, `%s: port missing (add port = "/dev/ttyUSB0", the serial device)`, subj)
			} else if j, dup := ports[s.Port]; dup {
				v.add(p+".port", ErrDuplicate, "%s: port %q is already used by source %q; one port carries one source", subj, s.Port, v.r.Sources[j].Name)
			} else {
				ports[s.Port] = i
			}
			if s.Format == "delimited" {
				v.columns(i, p, subj, s, readBy)
			} else if len(s.Channels) == 0 {
				v.add(p+".channels", ErrMissing, `%s: channels missing (add channels = ["a", "b"], the channel names in frame order)`, subj)
			}
			if s.Baud <= 0 {
				v.add(p+".baud", ErrValue, "%s: baud must be > 0, such as 115200", subj)
			}
			if !slices.Contains(formatWords, s.Format) {
				v.add(p+".format", ErrValue, `%s: format %q is not known (use "frame" or "delimited")`, subj, s.Format)
			}
		case SourceMQTT:
			switch {
			case s.Broker == "":
				v.add(p+".broker", ErrMissing, `%s: broker missing (add broker = "tcp://127.0.0.1:1883")`, subj)
			case brokerUserInfo(s.Broker):
				v.add(p+".broker", ErrValue, "%s: "+brokerUserInfoMsg, subj)
			case !validBroker(s.Broker):
				v.add(p+".broker", ErrValue, `%s: broker %q needs a scheme, host and port, like "tcp://127.0.0.1:1883"`, subj, s.Broker)
			}
			if s.Topic == "" {
				v.add(p+".topic", ErrMissing, `%s: topic missing (add topic = "liftyard/<rig>/raw")`, subj)
			}
		case SourceSimulated:
			if !finite(s.RateHz) || s.RateHz <= 0 {
				v.add(p+".rate_hz", ErrValue, "%s: rate_hz must be > 0 (samples per second)", subj)
			}
		default:
			v.add(p+".type", ErrValue, `%s: type %q is not known (use "serial", "mqtt" or "simulated")`, subj, s.Type)
		}
		own := map[string]bool{}
		for k, name := range s.Channels {
			cp := fmt.Sprintf("%s.channels[%d]", p, k)
			if own[name] {
				v.add(cp, ErrDuplicate, "%s: channel %q is listed twice", subj, name)
				continue
			}
			own[name] = true
			v.ref(cp, subj, "channels", name, "")
			if other, dup := readBy[name]; dup {
				v.add(cp, ErrDuplicate, "%s: channel %q is already read by source %q; a channel has one source", subj, name, other)
			} else {
				readBy[name] = s.Name
			}
		}
	}
}

// TimeColumns are the column names of a delimited line that carry the
// device time, with their factor to microseconds.
var TimeColumns = map[string]float64{"t_us": 1, "t_ms": 1e3, "t_s": 1e6}

// ColumnChannels returns the channel names among a delimited source's
// columns, in order: the columns that are neither "_" nor a time column.
func ColumnChannels(columns []string) []string {
	var names []string
	for _, c := range columns {
		if _, isTime := TimeColumns[c]; isTime || c == "_" {
			continue
		}
		names = append(names, c)
	}
	return names
}

// Carried returns the channels source s says it carries, in its wire
// order: a serial frame source's channels, a delimited source's channel
// columns, an MQTT source's channels. listed is false when s lists none
// and may carry any channel (an MQTT source without a channels list, a
// simulated source).
func (s Source) Carried() (chans []string, listed bool) {
	switch {
	case s.Type == SourceSerial && s.Format == "delimited":
		return ColumnChannels(s.Columns), true
	case s.Type == SourceSerial:
		return s.Channels, true
	case s.Type == SourceMQTT && len(s.Channels) > 0:
		return s.Channels, true
	default:
		return nil, false
	}
}

// columns checks a delimited source's column list: channel names that exist
// and are read by no other source, "_" to skip a field, at most one time column.
func (v *validator) columns(i int, p, subj string, s Source, readBy map[string]string) {
	if len(s.Columns) == 0 {
		v.add(p+".columns", ErrMissing, `%s: columns missing (add columns = ["t_ms", "n_fore", "_", "pitot"]: a channel name per field, "_" to skip one, t_us/t_ms/t_s for a device time)`, subj)
		return
	}
	if s.Delimiter == "" {
		v.add(p+".delimiter", ErrValue, `%s: delimiter must not be empty (e.g. ",", ";" or "\t")`, subj)
	}
	times, chans := 0, 0
	for k, name := range s.Columns {
		cp := fmt.Sprintf("%s.columns[%d]", p, k)
		if name == "_" {
			continue
		}
		if _, isTime := TimeColumns[name]; isTime {
			if times++; times > 1 {
				v.add(cp, ErrDuplicate, "%s: more than one time column (keep one of t_us, t_ms, t_s)", subj)
			}
			continue
		}
		chans++
		v.ref(cp, subj, "columns", name, "")
		if other, dup := readBy[name]; dup {
			v.add(cp, ErrDuplicate, "%s: channel %q is already read by source %q; a channel has one source", subj, name, other)
		} else {
			readBy[name] = s.Name
		}
	}
	if chans == 0 {
		v.add(p+".columns", ErrValue, "%s: columns name no channel; at least one field must be a channel", subj)
	}
}

// MaxAreaM2 is the largest reference or tap area a rig file may give:
// 10 000 m², a hectare, far above any test article; a larger number is a
// slip of units or of the keyboard.
const MaxAreaM2 = 1e4

// brokerUserInfoMsg says why a broker URL with a user or password is
// refused (by check and record alike) and what to do instead. It never
// quotes the URL, which would print the password.
const brokerUserInfoMsg = "the broker URL holds a user name or password, which would show in logs and run records; " +
	"give the user in username and the password in an environment variable named by password_env"

// brokerUserInfo tells whether a broker URL holds user information
// (tcp://user:pw@host:1883).
func brokerUserInfo(b string) bool {
	_, rest, ok := strings.Cut(b, "://")
	if !ok {
		return false
	}
	authority, _, _ := strings.Cut(rest, "/")
	return strings.Contains(authority, "@")
}

// present tells whether the file gives the key at path (a zero value
// written out is not a missing one).
func (v *validator) present(path string) bool {
	if v.d.idx == nil {
		return false
	}
	_, ok := v.d.idx.pos[path]
	return ok
}

func validBroker(b string) bool {
	scheme, rest, ok := strings.Cut(b, "://")
	if !ok || rest == "" {
		return false
	}
	switch scheme {
	case "tcp", "ssl", "tls", "ws", "wss", "mqtt", "mqtts":
	default:
		return false
	}
	host, port, ok := strings.Cut(rest, ":")
	if scheme == "ws" || scheme == "wss" {
		return host != ""
	}
	return ok && host != "" && port != ""
}

func (v *validator) lift() {
	l, kind := v.r.Lift, v.r.Kind
	const subj = "lift"
	list := func(key string, names []string) {
		seen := map[string]bool{}
		for k, n := range names {
			path := fmt.Sprintf("lift.%s[%d]", key, k)
			if seen[n] {
				v.add(path, ErrDuplicate, "lift: %s lists %q twice", key, n)
				continue
			}
			seen[n] = true
			v.ref(path, subj, key, n, QuantityForce)
		}
	}
	list("normal", l.Normal)
	list("axial", l.Axial)
	for _, one := range []struct {
		key, name string
		q         Quantity
	}{
		{"moment", l.Moment, QuantityMoment},
		{"angle", l.AngleChannel, QuantityAngle},
		{"dynamic_pressure", l.DynamicPressure, QuantityPressure},
		{"speed", l.Speed, QuantitySpeed},
		{"spin", l.Spin, QuantityRotation},
		{"direction", l.Direction, QuantityAngle},
		{"temperature", l.Temperature, QuantityTemperature},
	} {
		if one.name != "" {
			v.ref("lift."+one.key, subj, one.key, one.name, one.q)
		}
	}
	if !finite(l.AngleRad) || math.Abs(l.AngleRad) > math.Pi {
		v.add("lift.angle", ErrValue, "lift: a fixed angle must be within -180 to 180 degrees")
	}
	if !finite(l.AngleURad) || l.AngleURad < 0 {
		v.add("lift.angle_u_deg", ErrValue, "lift: angle_u_deg must be ≥ 0 (a standard uncertainty in degrees)")
	}
	if !finite(l.PitotCoeffU) || l.PitotCoeffU < 0 {
		v.add("lift.pitot_coefficient_u", ErrValue, "lift: pitot_coefficient_u must be ≥ 0 (the standard uncertainty of the pitot coefficient)")
	}
	if !finite(l.PitotCoeff) || l.PitotCoeff <= 0 {
		v.add("lift.pitot_coefficient", ErrValue, "lift: pitot_coefficient must be > 0 (1 for a standard pitot-static tube)")
	}
	if d := l.Design; d != "" && d != DesignThinAirfoil && !strings.EqualFold(filepath.Ext(d), ".csv") {
		v.add("lift.design", ErrValue, `lift: design %q: want a design-curve CSV file (columns alpha_deg,cl[,cl_u95]) or "thin-airfoil"`, d)
	}
	if a := l.DesignAlphaZeroRad; !finite(a) || math.Abs(a) > Rad(30) {
		v.add("lift.design_alpha_zero_deg", ErrValue, "lift: design_alpha_zero_deg must be within -30 to 30 degrees (the design's zero-lift angle; negative for positive camber)")
	} else if a != 0 && l.Design != DesignThinAirfoil {
		v.add("lift.design_alpha_zero_deg", ErrValue, `lift: design_alpha_zero_deg applies to design = "thin-airfoil" only (a design CSV states its own zero-lift angle in a comment line "# alpha_zero_deg = -2.1")`)
	}
	needQ := func() {
		if l.DynamicPressure == "" && l.Speed == "" {
			v.add("lift.dynamic_pressure", ErrMissing, `lift: no flow reference (add dynamic_pressure = "<pitot channel>" or speed = "<speed channel>")`)
		}
	}
	needNormal := func(what string) {
		if len(l.Normal) == 0 {
			v.add("lift.normal", ErrMissing, "lift: normal missing (add normal = [\"...\"], the force channels summed into %s)", what)
		}
	}
	switch kind {
	case KindFoil, KindBody:
		needNormal("the normal force")
		needQ()
		if l.AngleChannel == "" && v.d.angleMissing {
			v.add("lift.angle", ErrMissing, `lift: angle missing (add angle = "<angle channel>", or a fixed angle of attack in degrees such as angle = 4.0)`)
		}
	case KindRotor:
		needNormal("the lift force")
		needQ()
		if l.Spin == "" {
			v.add("lift.spin", ErrMissing, `lift: spin missing (add spin = "<rotation channel>" for the spin ratio)`)
		}
	case KindRoof:
		needQ()
	}
}

// RoofZoneWhole is the zone name of a roof's whole-roof result; a rig file
// may not use it for a zone of its own.
const RoofZoneWhole = "roof"

func (v *validator) roof() {
	r := v.r
	isRoof := r.Kind == KindRoof
	zones := map[string]int{}
	for i, z := range r.Zones {
		p := indexPath("zone", i)
		v.checkName("zone", p, z.Name, zones, i)
		if !finite(z.DesignCp) {
			v.add(p+".design_cp", ErrValue, "%s: design_cp must be a finite number", itemName("zone", i, z.Name))
		}
		if !finite(z.DesignU) || z.DesignU < 0 {
			v.add(p+".design_u", ErrValue, "%s: design_u must be ≥ 0 (an expanded 95 %% uncertainty)", itemName("zone", i, z.Name))
		}
	}
	taps := map[string]int{}
	tapChan := map[string]string{}
	for i, t := range r.Taps {
		p := indexPath("tap", i)
		v.checkName("tap", p, t.Name, taps, i)
		subj := itemName("tap", i, t.Name)
		if t.Channel == "" {
			v.add(p+".channel", ErrMissing, `%s: channel missing (add channel = "<pressure channel>")`, subj)
		} else {
			v.ref(p+".channel", subj, "channel", t.Channel, QuantityPressure)
			if other, dup := tapChan[t.Channel]; dup {
				v.add(p+".channel", ErrDuplicate, "%s: channel %q is already tap %q", subj, t.Channel, other)
			} else {
				tapChan[t.Channel] = t.Name
			}
		}
		switch {
		case !finite(t.AreaM2) || t.AreaM2 < 0 || (t.AreaM2 == 0 && v.present(p+".area_m2")):
			v.add(p+".area_m2", ErrValue, "%s: area_m2 must be > 0, not %g", subj, t.AreaM2)
		case t.AreaM2 > MaxAreaM2:
			v.add(p+".area_m2", ErrValue, "%s: area_m2 = %g m² is not plausible (more than %g m²); give the area in m²", subj, t.AreaM2, float64(MaxAreaM2))
		case t.AreaM2 == 0:
			v.add(p+".area_m2", ErrMissing, "%s: area_m2 missing (add area_m2 = the tap's tributary area in m²)", subj)
		}
		if !finite(t.XM) || !finite(t.YM) {
			v.add(p+".x_m", ErrValue, "%s: x_m and y_m must be finite", subj)
		}
		switch _, ok := zones[t.Zone]; {
		case t.Zone == "":
			v.add(p+".zone", ErrMissing, `%s: zone missing (add zone = "<zone name>")`, subj)
		case !ok:
			names := make([]string, 0, len(zones))
			for n := range zones {
				names = append(names, n)
			}
			slices.Sort(names)
			hint := ""
			if s := suggest(t.Zone, names); s != "" {
				hint = fmt.Sprintf("; did you mean %q?", s)
			}
			v.add(p+".zone", ErrReference, "%s: zone %q is not defined (define it under [[zone]]%s)", subj, t.Zone, hint)
		}
	}
	in := r.Internal
	if in.Channel != "" {
		v.ref("internal.channel", "internal", "channel", in.Channel, QuantityPressure)
		if in.HasCp {
			v.add("internal.cp", ErrValue, "internal: give channel or cp, not both")
		}
	}
	if in.HasCp && !finite(in.Cp) {
		v.add("internal.cp", ErrValue, "internal: cp must be a finite number")
	}
	if isRoof {
		if len(r.Taps) == 0 {
			v.add("tap", ErrMissing, `a roof needs pressure taps (add [[tap]] tables with name, channel, area_m2 and zone)`)
		}
		if len(r.Zones) == 0 {
			v.add("zone", ErrMissing, `a roof needs zones (add [[zone]] tables with name, design_cp and design_u)`)
		}
		if in.Channel == "" && !in.HasCp {
			v.add("internal", ErrMissing, `a roof needs its internal pressure (add [internal] with cp = 0.0 for a sealed mock-up, or channel = "<pressure channel>")`)
		}
		used := map[string]bool{}
		for _, t := range r.Taps {
			used[t.Zone] = true
		}
		for i, z := range r.Zones {
			p := indexPath("zone", i)
			switch {
			case z.Name == RoofZoneWhole:
				v.add(p+".name", ErrValue, "%s: the name %q is kept for the whole-roof result; choose another", itemName("zone", i, z.Name), RoofZoneWhole)
			case z.Name != "" && !used[z.Name]:
				v.add(p+".name", ErrValue, "%s: no tap lies in this zone (set zone = %q on its [[tap]] tables, or remove the zone)", itemName("zone", i, z.Name), z.Name)
			}
		}
		return
	}
	if r.Kind == "" {
		return
	}
	if len(r.Taps) > 0 {
		v.add("tap", ErrValue, `taps apply to kind = "roof" only (this rig is %q)`, r.Kind)
	}
	if len(r.Zones) > 0 {
		v.add("zone", ErrValue, `zones apply to kind = "roof" only (this rig is %q)`, r.Kind)
	}
	if in.Channel != "" || in.HasCp {
		v.add("internal", ErrValue, `[internal] applies to kind = "roof" only (this rig is %q)`, r.Kind)
	}
}

func finite(f float64) bool { return !math.IsNaN(f) && !math.IsInf(f, 0) }

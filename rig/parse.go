package rig

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"time"

	"github.com/BurntSushi/toml"
)

// Defaults that Parse fills in when the file leaves a key out.
const (
	DefaultTempK        = 288.15   // ISA sea level, 15 °C (ISO 2533); also the default water temperature
	DefaultPressurePa   = 101325.0 // ISA sea level (ISO 2533)
	DefaultBaud         = 115200
	DefaultSimRateHz    = 200.0
	DefaultSerialFormat = "frame"
	// StandardSeawaterSalinityKgPerKg is the absolute salinity of standard
	// seawater, 35.165 04 g/kg, the reference composition of TEOS-10
	// (IOC, SCOR and IAPSO 2010, "The international thermodynamic equation of
	// seawater – 2010", §2.4; Millero et al., Deep-Sea Res. I 55 (2008) 50–72),
	// which ITTC 7.5-02-01-03 uses for its seawater tables.
	StandardSeawaterSalinityKgPerKg = 0.03516504
)

// Load reads and parses the rig file at path. The error is an Errors list
// (see Parse) or a wrapped I/O error.
func Load(path string) (*Rig, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read rig file: %w", err)
	}
	return Parse(path, data)
}

// DesignThinAirfoil is the [lift] design value that asks for the theory
// curve (thin-airfoil 2π per radian with the finite-span correction on the
// rig's aspect ratio) instead of a design-curve CSV.
const DesignThinAirfoil = "thin-airfoil"

// Parse reads a rig file. filename is used in error messages and to resolve
// a relative [lift] design path (design = "thin-airfoil" is kept as is). On any problem it returns a nil Rig and
// Errors: every problem found, sorted by line, each an *Error wrapping one
// of the sentinels. The returned Rig holds SI values only, with defaults
// filled in; it has passed Validate.
func Parse(filename string, data []byte) (*Rig, error) {
	errFile := filename
	if errFile == "" {
		errFile = noFile
	}
	d := &decoder{file: errFile, reported: map[string]bool{}}
	if err := guard(errFile, data); err != nil {
		return nil, Errors{err.(*Error)}
	}
	var doc map[string]any
	if _, err := toml.Decode(string(data), &doc); err != nil {
		var pe toml.ParseError
		if errors.As(err, &pe) {
			d.errs = append(d.errs, &Error{File: d.file, Line: pe.Position.Line, Col: pe.Position.Col,
				Err: Problem(ErrSyntax, "%s", syntaxMessage(pe))})
		} else {
			d.errs = append(d.errs, &Error{File: d.file, Err: Problem(ErrSyntax, "%v", err)})
		}
		return nil, d.errs
	}
	d.idx = buildIndex(string(data))
	r := d.rig(doc)
	validate(r, d)
	if l := &r.Lift; l.Design != "" && l.Design != DesignThinAirfoil && filename != "" {
		dir := filepath.Dir(filename)
		if name, ok := localName(dir, l.Design); ok {
			l.Design, l.DesignDir = filepath.Join(dir, name), dir
		} else {
			d.add("lift.design", ErrValue, "lift: design must name a CSV file in the rig file's folder or below it (a relative path without ..), not %q", l.Design)
		}
	}
	if len(d.errs) > 0 {
		d.sort()
		return nil, d.errs
	}
	return r, nil
}

func syntaxMessage(pe toml.ParseError) string {
	msg := pe.Message
	if pe.LastKey != "" {
		msg = fmt.Sprintf("%s (after key %q)", msg, Excerpt(pe.LastKey))
	}
	return "TOML syntax: " + msg
}

// noFile names the rig in messages when it has no file name: a rig parsed
// from memory or built in code.
const noFile = "<rig>"

// decoder collects problems while it turns the decoded TOML into a Rig.
type decoder struct {
	file     string
	idx      *lineIndex
	errs     Errors
	reported map[string]bool // key paths that already have a problem: one report per key

	angleMissing bool // the file's [lift] has no angle key (Validate cannot tell a fixed 0° from none)
}

// add reports a problem at the key path. A second problem for the same path
// is dropped, so a bad unit is not also reported as a missing one.
func (d *decoder) add(path string, kind error, format string, args ...any) {
	d.addProblem(path, Problem(kind, format, args...))
}

// addProblem records err at path, once per path.
func (d *decoder) addProblem(path string, err error) {
	if d.reported[path] {
		return
	}
	d.reported[path] = true
	p := d.idx.at(path)
	d.errs = append(d.errs, &Error{File: d.file, Line: p.line, Col: p.col, Key: path, Err: err})
}

func (d *decoder) sort() {
	sort.SliceStable(d.errs, func(i, j int) bool {
		a, b := d.errs[i], d.errs[j]
		if a.Line != b.Line {
			return a.Line < b.Line
		}
		return a.Col < b.Col
	})
}

// table is one TOML table being read: its path, what to call it in
// messages, and which of its keys have been read.
type table struct {
	d       *decoder
	path    string
	subject string
	m       map[string]any
	allowed []string
}

func (d *decoder) table(path, subject string, m map[string]any, allowed ...string) *table {
	return &table{d: d, path: path, subject: subject, m: m, allowed: allowed}
}

func (t *table) keyPath(key string) string { return joinPath(t.path, key) }

func (t *table) errf(key string, kind error, format string, args ...any) {
	msg := fmt.Sprintf(format, Excerpts(format, args...)...)
	if t.subject != "" {
		msg = t.subject + ": " + msg
	}
	t.d.addProblem(t.keyPath(key), &problem{msg: msg, kind: kind})
}

func (t *table) has(key string) bool { _, ok := t.m[key]; return ok }

// unknown reports every key that the table does not define.
func (t *table) unknown() {
	keys := make([]string, 0, len(t.m))
	for k := range t.m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if slices.Contains(t.allowed, k) {
			continue
		}
		where := "at top level"
		if t.path != "" {
			where = "in " + tableName(t.path)
		}
		hint := ""
		if s := suggest(k, t.allowed); s != "" {
			hint = fmt.Sprintf(" (did you mean %s?)", s)
		} else if len(t.allowed) > 0 {
			hint = fmt.Sprintf(" (known keys: %s)", strings.Join(t.allowed, ", "))
		}
		t.d.add(t.keyPath(k), ErrUnknownKey, "%sunknown key %q %s%s", subjectPrefix(t.subject), k, where, hint)
	}
}

// tableName turns "channel[2].calibration" into "[[channel]] calibration".
func tableName(path string) string {
	base, rest, _ := strings.Cut(path, ".")
	name := "[" + base + "]"
	if i := strings.IndexByte(base, '['); i > 0 {
		name = "[[" + base[:i] + "]]"
	}
	if rest != "" {
		name += " " + stripIndices(rest)
	}
	return name
}

func stripIndices(p string) string {
	var b strings.Builder
	depth := 0
	for _, r := range p {
		switch {
		case r == '[':
			depth++
		case r == ']':
			depth--
		case depth == 0:
			b.WriteRune(r)
		}
	}
	return b.String()
}

func typeName(v any) string {
	switch v.(type) {
	case string:
		return "a string"
	case int64:
		return "an integer"
	case float64:
		return "a number"
	case bool:
		return "a boolean"
	case []any:
		return "an array"
	case []map[string]any:
		return "an array of tables"
	case map[string]any:
		return "a table"
	case time.Time, toml.Primitive:
		return "a date"
	default:
		return "a date"
	}
}

// str reads a string key; ok is false when it is absent or of another type.
func (t *table) str(key string) (string, bool) {
	v, present := t.m[key]
	if !present {
		return "", false
	}
	s, isStr := v.(string)
	if !isStr {
		t.errf(key, ErrValue, "%s must be a string in quotes, not %s", key, typeName(v))
		return "", false
	}
	return s, true
}

// num reads a number key (integer or float); ok is false when it is absent,
// of another type, or not finite.
func (t *table) num(key string) (float64, bool) {
	v, present := t.m[key]
	if !present {
		return 0, false
	}
	return t.toNum(key, key, v)
}

func (t *table) toNum(key, label string, v any) (float64, bool) {
	var f float64
	switch x := v.(type) {
	case int64:
		f = float64(x)
	case float64:
		f = x
	default:
		t.errf(key, ErrValue, "%s must be a number, not %s", label, typeName(v))
		return 0, false
	}
	if math.IsNaN(f) || math.IsInf(f, 0) {
		t.errf(key, ErrValue, "%s must be a finite number, not %v", label, f)
		return 0, false
	}
	return f, true
}

// nameList reads an array of strings, and refuses a single string: a
// source's channels and columns are always a list, even of one.
func (t *table) nameList(key string) []string {
	if _, isStr := t.m[key].(string); isStr {
		t.errf(key, ErrValue, `%s must be an array of names in quotes, like ["a", "b"] (one name too: ["a"]), not a string`, key)
		return nil
	}
	return t.strList(key)
}

// strList reads an array of strings; a single string counts as a list of one.
func (t *table) strList(key string) []string {
	v, present := t.m[key]
	if !present {
		return nil
	}
	switch x := v.(type) {
	case string:
		return []string{x}
	case []any:
		out := make([]string, 0, len(x))
		for i, e := range x {
			s, isStr := e.(string)
			if !isStr {
				t.d.add(indexPath(t.keyPath(key), i), ErrValue, "%s%s must list channel names in quotes, not %s", subjectPrefix(t.subject), key, typeName(e))
				continue
			}
			out = append(out, s)
		}
		return out
	}
	t.errf(key, ErrValue, "%s must be an array of names in quotes, like [\"a\", \"b\"], not %s", key, typeName(v))
	return nil
}

// numList reads an array of numbers; a problem with any element is reported
// and gives nil.
func (t *table) numList(key string) []float64 {
	arr, isArr := t.m[key].([]any)
	if !isArr {
		return nil
	}
	out := make([]float64, 0, len(arr))
	for k, e := range arr {
		f, ok := t.toNum(indexKey(key, k), fmt.Sprintf("%s[%d]", key, k), e)
		if !ok {
			return nil
		}
		out = append(out, f)
	}
	return out
}

func subjectPrefix(s string) string {
	if s == "" {
		return ""
	}
	return s + ": "
}

// sub returns a sub-table, or nil when absent or of another type.
func (t *table) sub(key string, allowed ...string) *table {
	v, present := t.m[key]
	if !present {
		return nil
	}
	m, isMap := v.(map[string]any)
	if !isMap {
		t.errf(key, ErrValue, "%s must be a table, written [%s] or %s = { ... }, not %s", key, key, key, typeName(v))
		return nil
	}
	return t.d.table(t.keyPath(key), "", m, allowed...)
}

// items returns an array of tables ([[key]]).
func (t *table) items(key string) []map[string]any {
	v, present := t.m[key]
	if !present {
		return nil
	}
	switch x := v.(type) {
	case []map[string]any:
		return x
	case []any:
		out := make([]map[string]any, 0, len(x))
		for _, e := range x {
			m, isMap := e.(map[string]any)
			if !isMap {
				t.errf(key, ErrValue, "%s must be an array of tables: write each as [[%s]]", key, key)
				return nil
			}
			out = append(out, m)
		}
		return out
	}
	t.errf(key, ErrValue, "%s must be an array of tables: write each one under its own [[%s]] header, not [%s]", key, key, key)
	return nil
}

// word reads a string that must be one of the allowed words.
func (t *table) word(key string, words []string) (string, bool) {
	s, ok := t.str(key)
	if !ok {
		return "", false
	}
	if !slices.Contains(words, s) {
		hint := ""
		if sug := suggest(s, words); sug != "" {
			hint = fmt.Sprintf("did you mean %s? ", sug)
		}
		quoted := make([]string, len(words))
		for i, w := range words {
			quoted[i] = fmt.Sprintf("%q", w)
		}
		t.errf(key, ErrValue, "%s %q is not known (%suse %s)", key, s, hint, orList(quoted))
		return "", false
	}
	return s, true
}

var (
	kindWords   = []string{string(KindFoil), string(KindRoof), string(KindRotor), string(KindBody)}
	fluidWords  = []string{string(FluidAir), string(FluidFreshWater), string(FluidSeaWater)}
	sourceWords = []string{string(SourceSerial), string(SourceMQTT), string(SourceSimulated)}
	formatWords = []string{"frame", "delimited"}
	parityWords = []string{"none", "even", "odd"}
)

// The keys of each table.
var (
	topKeys        = []string{"name", "kind", "fluid", "conditions", "reference", "source", "channel", "lift", "tap", "zone", "internal", "publish", "tare", "balance", "blockage", "wind"}
	conditionsKeys = []string{"temperature_c", "temperature", "pressure_pa", "pressure", "humidity_pct", "salinity_g_per_kg"}
	referenceKeys  = []string{"area_m2", "area_u_m2", "area_kind", "length_m", "span_m", "radius_m", "radius_u_m"}
	sourceKeys     = []string{"name", "type", "port", "baud", "data_bits", "parity", "stop_bits", "format", "channels", "delimiter", "columns", "broker", "topic", "client_id", "username", "password_env", "ca_file", "rate_hz"}
	channelKeys    = []string{"name", "quantity", "unit", "capacity", "calibration", "raw_range"}
	publishKeys    = []string{"broker", "topic_prefix", "client_id", "username", "password_env", "ca_file"}
	calKeys        = []string{"poly", "u", "id", "span_u_pct"}
	liftKeys       = []string{"normal", "axial", "moment", "angle", "angle_u_deg", "dynamic_pressure", "pitot_coefficient", "pitot_coefficient_u", "speed", "spin", "direction", "temperature", "design", "design_alpha_zero_deg"}
	tapKeys        = []string{"name", "channel", "area_m2", "zone", "x_m", "y_m"}
	zoneKeys       = []string{"name", "design_cp", "design_u", "design_value", "design_q"}
	internalKeys   = []string{"channel", "cp"}
)

func (d *decoder) rig(doc map[string]any) *Rig {
	r := &Rig{}
	top := d.table("", "", doc, topKeys...)
	r.Name, _ = top.str("name")
	if k, ok := top.word("kind", kindWords); ok {
		r.Kind = Kind(k)
	}
	if f, ok := top.word("fluid", fluidWords); ok {
		r.Fluid = Fluid(f)
	}
	r.Conditions = d.conditions(top.sub("conditions", conditionsKeys...), r.Fluid)
	r.Reference = d.reference(top.sub("reference", referenceKeys...), r.Kind)
	for i, m := range top.items("source") {
		r.Sources = append(r.Sources, d.source(i, m))
	}
	for i, m := range top.items("channel") {
		r.Channels = append(r.Channels, d.channel(i, m))
	}
	r.Lift = d.lift(top.sub("lift", liftKeys...))
	for i, m := range top.items("tap") {
		r.Taps = append(r.Taps, d.tap(i, m))
	}
	for i, m := range top.items("zone") {
		r.Zones = append(r.Zones, d.zone(i, m))
	}
	r.Internal = d.internal(top.sub("internal", internalKeys...))
	r.Wind = d.wind(top.sub("wind", windKeys...))
	r.Publish = d.publish(top.sub("publish", publishKeys...))
	d.corrections(top, r)
	top.unknown()
	return r
}

func (d *decoder) publish(t *table) *Publish {
	if t == nil {
		return nil
	}
	t.subject = "publish"
	p := &Publish{}
	p.Broker, _ = t.str("broker")
	p.TopicPrefix, _ = t.str("topic_prefix")
	p.ClientID, _ = t.str("client_id")
	p.Username, _ = t.str("username")
	p.PasswordEnv, _ = t.str("password_env")
	p.CAFile, _ = t.str("ca_file")
	if p.Broker == "" && !t.has("broker") {
		t.errf("broker", ErrMissing, "broker missing (add broker = \"tcp://host:1883\", the site's MQTT broker)")
	}
	if p.TopicPrefix == "" && !t.has("topic_prefix") {
		t.errf("topic_prefix", ErrMissing, "topic_prefix missing (add topic_prefix = \"yard/rig1\")")
	}
	t.unknown()
	return p
}

func (d *decoder) conditions(t *table, fluid Fluid) Conditions {
	c := Conditions{TempK: DefaultTempK, PressurePa: DefaultPressurePa}
	if fluid == FluidSeaWater {
		c.SalinityKgPerKg = StandardSeawaterSalinityKgPerKg
	}
	if t == nil {
		return c
	}
	t.subject = "conditions"
	if v, ok := t.num("temperature_c"); ok {
		c.TempK = v + 273.15
	}
	if t.has("temperature") {
		if t.has("temperature_c") {
			t.errf("temperature", ErrDuplicate, "give temperature_c or temperature, not both")
		} else if v, ok := t.quantity("temperature", QuantityTemperature); ok {
			c.TempK = v
		}
	}
	if v, ok := t.num("pressure_pa"); ok {
		c.PressurePa = v
	}
	if t.has("pressure") {
		if t.has("pressure_pa") {
			t.errf("pressure", ErrDuplicate, "give pressure_pa or pressure, not both")
		} else if v, ok := t.quantity("pressure", QuantityPressure); ok {
			c.PressurePa = v
		}
	}
	if v, ok := t.num("humidity_pct"); ok {
		c.RelHumidity = v / 100
	}
	if v, ok := t.num("salinity_g_per_kg"); ok {
		c.SalinityKgPerKg = v / 1000
	}
	t.unknown()
	return c
}

// quantity reads a string such as "15 °C" and checks its quantity.
func (t *table) quantity(key string, want Quantity) (float64, bool) {
	s, ok := t.str(key)
	if !ok {
		return 0, false
	}
	v, q, err := ParseQuantity(s)
	if err != nil {
		var p *problem
		if errors.As(err, &p) {
			t.errf(key, p.kind, "%s: %s (use %s)", key, p.msg, orList(Units(want)))
		}
		return 0, false
	}
	if q != want {
		t.errf(key, ErrUnit, "%s %q is a %s, not a %s (use %s)", key, s, q, want, orList(Units(want)))
		return 0, false
	}
	return v, true
}

func (d *decoder) reference(t *table, kind Kind) Reference {
	r := Reference{AreaKind: defaultAreaKind(kind)}
	if t == nil {
		return r
	}
	t.subject = "reference"
	r.AreaM2, _ = t.num("area_m2")
	r.AreaUM2, _ = t.num("area_u_m2")
	if s, ok := t.str("area_kind"); ok {
		r.AreaKind = s
	}
	r.LengthM, _ = t.num("length_m")
	r.SpanM, _ = t.num("span_m")
	r.RadiusM, _ = t.num("radius_m")
	r.RadiusUM, _ = t.num("radius_u_m") // issue 12: optional, default 0
	t.unknown()
	return r
}

func defaultAreaKind(k Kind) string {
	switch k {
	case KindFoil:
		return "planform"
	case KindRoof:
		return "tributary"
	case KindRotor:
		return "projected"
	case KindBody:
		return "frontal"
	}
	return ""
}

// itemSubject names an array element in messages: `channel "n_fore"`, or
// `[[channel]] #3` while it has no name.
func itemSubject(kind string, i int, m map[string]any) string {
	if n, ok := m["name"].(string); ok && n != "" {
		return fmt.Sprintf("%s %q", kind, Excerpt(n))
	}
	return fmt.Sprintf("[[%s]] #%d", kind, i+1)
}

func (d *decoder) source(i int, m map[string]any) Source {
	t := d.table(indexPath("source", i), itemSubject("source", i, m), m, sourceKeys...)
	s := Source{}
	s.Name, _ = t.str("name")
	if w, ok := t.word("type", sourceWords); ok {
		s.Type = SourceType(w)
	}
	s.Port, _ = t.str("port")
	if v, ok := t.num("baud"); ok {
		if v != math.Trunc(v) || v < 1 || v > 1e8 {
			t.errf("baud", ErrValue, "baud must be a whole number of bits per second such as 115200, not %v", v)
		} else {
			s.Baud = int(v)
		}
	}
	if v, ok := t.num("data_bits"); ok {
		if v != math.Trunc(v) || v < 5 || v > 8 {
			t.errf("data_bits", ErrValue, "data_bits must be 5, 6, 7 or 8, not %v", v)
		} else {
			s.DataBits = int(v)
		}
	}
	if w, ok := t.word("parity", parityWords); ok {
		s.Parity = w
	}
	if v, ok := t.num("stop_bits"); ok {
		if v != 1 && v != 2 {
			t.errf("stop_bits", ErrValue, "stop_bits must be 1 or 2, not %v", v)
		} else {
			s.StopBits = int(v)
		}
	}
	if w, ok := t.word("format", formatWords); ok {
		s.Format = w
	}
	s.Channels = t.nameList("channels")
	s.Delimiter, _ = t.str("delimiter")
	s.Columns = t.nameList("columns")
	s.Broker, _ = t.str("broker")
	s.Topic, _ = t.str("topic")
	s.ClientID, _ = t.str("client_id")
	s.Username, _ = t.str("username")
	s.PasswordEnv, _ = t.str("password_env")
	s.CAFile, _ = t.str("ca_file")
	s.RateHz, _ = t.num("rate_hz")
	// Keys that belong to another source type are a mistake, not a default.
	for _, k := range []struct {
		key string
		typ SourceType
	}{{"port", SourceSerial}, {"baud", SourceSerial}, {"data_bits", SourceSerial}, {"parity", SourceSerial}, {"stop_bits", SourceSerial},
		{"format", SourceSerial}, {"delimiter", SourceSerial}, {"columns", SourceSerial},
		{"broker", SourceMQTT}, {"topic", SourceMQTT}, {"client_id", SourceMQTT}, {"username", SourceMQTT}, {"password_env", SourceMQTT}, {"ca_file", SourceMQTT},
		{"rate_hz", SourceSimulated}} {
		if s.Type != "" && s.Type != k.typ && t.has(k.key) {
			t.errf(k.key, ErrValue, "%s applies to %s sources only (remove it, or set type = %q)", k.key, k.typ, k.typ)
		}
	}
	switch s.Type {
	case SourceSerial:
		if s.Baud == 0 && !t.has("baud") {
			s.Baud = DefaultBaud
		}
		if s.Format == "" && !t.has("format") {
			s.Format = DefaultSerialFormat
		}
		if s.DataBits == 0 && !t.has("data_bits") {
			s.DataBits = 8
		}
		if s.Parity == "" && !t.has("parity") {
			s.Parity = "none"
		}
		if s.StopBits == 0 && !t.has("stop_bits") {
			s.StopBits = 1
		}
		if s.Format == "delimited" && s.Delimiter == "" && !t.has("delimiter") {
			s.Delimiter = ","
		}
		if s.Format == "delimited" && t.has("channels") {
			t.errf("channels", ErrValue, "a delimited source names its fields in columns (a channel name, \"_\" to skip, or t_us/t_ms/t_s), not channels")
		}
		if s.Format == "frame" && t.has("columns") {
			t.errf("columns", ErrValue, "a frame source names its values in channels, in frame order; columns is for format = \"delimited\"")
		}
	case SourceSimulated:
		if !t.has("rate_hz") {
			s.RateHz = DefaultSimRateHz
		}
	}
	t.unknown()
	return s
}

func (d *decoder) channel(i int, m map[string]any) Channel {
	t := d.table(indexPath("channel", i), itemSubject("channel", i, m), m, channelKeys...)
	c := Channel{}
	c.Name, _ = t.str("name")
	if w, ok := t.word("quantity", quantityWords()); ok {
		c.Quantity = Quantity(w)
	}
	unitOK := false
	if u, ok := t.str("unit"); ok {
		c.Unit = u
		if c.Quantity != "" {
			a, err := UnitToSI(c.Quantity, u)
			if err != nil {
				var p *problem
				errors.As(err, &p)
				t.errf("unit", ErrUnit, "%s", p.msg)
			} else {
				c.ToSI, unitOK = a, true
			}
		}
	}
	if v, present := t.m["capacity"]; present {
		switch x := v.(type) {
		case string:
			si, q, err := ParseQuantity(x)
			var p *problem
			switch {
			case err != nil && errors.As(err, &p):
				t.errf("capacity", p.kind, "capacity: %s", p.msg)
			case c.Quantity != "" && q != c.Quantity:
				t.errf("capacity", ErrUnit, "capacity %q is a %s, but the channel measures %s (use %s)", x, q, c.Quantity, orList(Units(c.Quantity)))
			case si <= 0 || capacityWritten(x) <= 0:
				t.errf("capacity", ErrValue, "capacity must be > 0, not %q (the sensor's rated range)", x)
			default:
				c.CapacitySI = si
			}
		default:
			if f, ok := t.toNum("capacity", "capacity", v); ok {
				switch {
				case f <= 0:
					t.errf("capacity", ErrValue, "capacity must be > 0, not %v (the sensor's rated range)", f)
				case unitOK:
					c.CapacitySI = c.ToSI.Apply(f)
				}
			}
		}
	}
	if t.has("raw_range") {
		if lim := t.numList("raw_range"); len(lim) == 2 && lim[0] < lim[1] {
			c.RawMin, c.RawMax = lim[0], lim[1]
		} else {
			t.errf("raw_range", ErrValue, "raw_range must be [min, max] of the raw reading with min < max, e.g. [-8388608, 8388607] for a 24-bit converter")
		}
	}
	if v, present := t.m["calibration"]; present {
		cm, isMap := v.(map[string]any)
		if !isMap {
			t.errf("calibration", ErrValue, "calibration must be a table, like { poly = [c0, c1], u = 0.5 } or { id = \"...\" }, not %s", typeName(v))
		} else {
			ct := d.table(t.keyPath("calibration"), t.subject, cm, calKeys...)
			c.Calibration = d.calibration(ct, c)
		}
	}
	t.unknown()
	return c
}

// capacityWritten returns the number as written in a capacity string, so
// that "0 °C" is refused even though it is 273.15 K.
func capacityWritten(s string) float64 {
	m := quantityRE.FindStringSubmatch(s)
	if m == nil {
		return 0
	}
	var f float64
	fmt.Sscan(m[1], &f)
	return f
}

func (d *decoder) calibration(t *table, c Channel) Calibration {
	cal := Calibration{}
	cal.ID, _ = t.str("id")
	if v, present := t.m["poly"]; present {
		arr, isArr := v.([]any)
		if !isArr {
			t.errf("poly", ErrValue, "calibration poly must be an array of numbers [c0, c1, ...], not %s", typeName(v))
		} else {
			cal.Poly = make([]float64, 0, len(arr))
			for k, e := range arr {
				f, ok := t.toNum(indexKey("poly", k), fmt.Sprintf("calibration poly[%d]", k), e)
				if ok {
					cal.Poly = append(cal.Poly, f)
				}
			}
			if len(cal.Poly) != len(arr) {
				// Reported per coefficient; an empty (not nil) poly keeps
				// Validate from also calling the calibration missing.
				cal.Poly = []float64{}
				d.reported[t.keyPath("poly")] = true
			}
		}
	}
	cal.U, _ = t.num("u")
	if v, ok := t.num("span_u_pct"); ok {
		if !(v >= 0 && v < 100) {
			t.errf("span_u_pct", ErrValue, "calibration span_u_pct must be a percentage from 0 to 100 (the relative standard uncertainty of the span), not %g", v)
		}
		cal.SpanURel = v / 100
	}
	if t.has("poly") && !t.has("u") && !t.has("id") {
		unit := c.Unit
		if unit == "" {
			unit = "the channel's unit"
		}
		t.errf("u", ErrMissing, "calibration u missing (add u = the standard uncertainty of one calibrated value, in %s)", unit)
	}
	t.unknown()
	return cal
}

func indexKey(key string, i int) string { return indexPath(key, i) }

func (d *decoder) lift(t *table) Lift {
	l := Lift{PitotCoeff: 1}
	d.angleMissing = t == nil || !t.has("angle")
	if t == nil {
		return l
	}
	t.subject = "lift"
	l.Normal = t.strList("normal")
	l.Axial = t.strList("axial")
	l.Moment, _ = t.str("moment")
	if v, present := t.m["angle"]; present {
		switch x := v.(type) {
		case string:
			l.AngleChannel = x
		default:
			if f, ok := t.toNum("angle", "angle (a channel name, or fixed degrees)", v); ok {
				l.AngleRad = Rad(f)
			}
		}
	}
	if v, ok := t.num("angle_u_deg"); ok {
		l.AngleURad = Rad(v)
	}
	l.DynamicPressure, _ = t.str("dynamic_pressure")
	if v, ok := t.num("pitot_coefficient"); ok {
		l.PitotCoeff = v
	}
	if v, ok := t.num("pitot_coefficient_u"); ok {
		l.PitotCoeffU = v
	}
	l.Speed, _ = t.str("speed")
	l.Spin, _ = t.str("spin")
	l.Direction, _ = t.str("direction")
	l.Temperature, _ = t.str("temperature")
	l.Design, _ = t.str("design")
	if v, ok := t.num("design_alpha_zero_deg"); ok {
		l.DesignAlphaZeroRad = Rad(v)
	}
	t.unknown()
	return l
}

func (d *decoder) tap(i int, m map[string]any) Tap {
	t := d.table(indexPath("tap", i), itemSubject("tap", i, m), m, tapKeys...)
	p := Tap{}
	p.Name, _ = t.str("name")
	p.Channel, _ = t.str("channel")
	p.AreaM2, _ = t.num("area_m2")
	p.Zone, _ = t.str("zone")
	p.XM, _ = t.num("x_m")
	p.YM, _ = t.num("y_m")
	t.unknown()
	return p
}

func (d *decoder) zone(i int, m map[string]any) Zone {
	t := d.table(indexPath("zone", i), itemSubject("zone", i, m), m, zoneKeys...)
	z := Zone{}
	z.Name, _ = t.str("name")
	var ok bool
	if z.DesignCp, ok = t.num("design_cp"); !ok && !t.has("design_cp") {
		t.errf("design_cp", ErrMissing, "design_cp missing (add design_cp = the zone's design net pressure coefficient, e.g. -1.2)")
	}
	if z.DesignU, ok = t.num("design_u"); !ok && !t.has("design_u") {
		t.errf("design_u", ErrMissing, "design_u missing (add design_u = the expanded 95 %% uncertainty of design_cp, e.g. 0.1)")
	}
	z.DesignValue, z.DesignQ = DesignMean, DesignMean
	if w, ok := t.word("design_value", []string{DesignMean, DesignPeak}); ok {
		z.DesignValue = w
	}
	if w, ok := t.word("design_q", []string{DesignMean, DesignPeak}); ok {
		z.DesignQ = w
	}
	t.unknown()
	return z
}

func (d *decoder) internal(t *table) Internal {
	in := Internal{}
	if t == nil {
		return in
	}
	t.subject = "internal"
	in.Channel, _ = t.str("channel")
	if v, ok := t.num("cp"); ok {
		in.Cp, in.HasCp = v, true
	}
	t.unknown()
	return in
}

// suggest returns the allowed word closest to s when it is a likely typing
// slip (edit distance ≤ 2 and under half the word), or "".
func suggest(s string, allowed []string) string {
	best, bestD := "", 3
	for _, a := range allowed {
		dd := editDistance(strings.ToLower(s), strings.ToLower(a))
		if dd < bestD && 2*dd < max(len(s), len(a)) { // "v" is not a slip of "f"
			best, bestD = a, dd
		}
	}
	return best
}

// editDistance is the Levenshtein distance between a and b, in bytes.
func editDistance(a, b string) int {
	if len(a) > 64 || len(b) > 64 {
		return 99
	}
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

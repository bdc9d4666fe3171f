package rig

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
)

// Kind names the body under test. It decides which results a run produces.
type Kind string

// The kinds of rig that liftyard knows.
const (
	KindFoil  Kind = "foil"  // foil, fin, sail or strut on a tow rig: polar points C_L(α), C_D(α)
	KindRoof  Kind = "roof"  // roof or cladding mock-up with pressure taps: Cp per tap and zone
	KindRotor Kind = "rotor" // spinning body (Magnus): C_L(S) with spin ratio S = ωR/V
	KindBody  Kind = "body"  // any other body with a force balance
)

// Fluid names the medium around the body; it selects the property formulas.
type Fluid string

// The fluids that liftyard has property formulas for.
const (
	FluidAir        Fluid = "air"
	FluidFreshWater Fluid = "fresh_water"
	FluidSeaWater   Fluid = "sea_water"
)

// Quantity is what a channel measures once calibrated. It fixes the SI unit
// of the channel's values inside the program.
type Quantity string

// The channel quantities and the SI unit each carries inside the program.
const (
	QuantityForce       Quantity = "force"       // N
	QuantityMoment      Quantity = "moment"      // N·m
	QuantityPressure    Quantity = "pressure"    // Pa (differential or absolute)
	QuantitySpeed       Quantity = "speed"       // m/s
	QuantityAngle       Quantity = "angle"       // rad
	QuantityTemperature Quantity = "temperature" // K
	QuantityRotation    Quantity = "rotation"    // rad/s
	QuantityHumidity    Quantity = "humidity"    // fraction 0..1
	QuantityVoltage     Quantity = "voltage"     // V
)

// Rig describes one experiment: the body, the fluid, the sensors and how
// they combine into lift. Every dimensional number in it is in SI units; the
// file's own units were converted once, by Parse.
type Rig struct {
	Name  string
	Kind  Kind
	Fluid Fluid

	Conditions Conditions
	Reference  Reference
	Sources    []Source
	Channels   []Channel
	Lift       Lift
	Taps       []Tap
	Zones      []Zone
	Internal   Internal
	Wind       Wind     // roof rigs: block length, reference height and profile, sectors ([wind], optional)
	Publish    *Publish // nil: results are not published

	// Corrections (rig/corrections.go); each is optional, absent = none.
	Tare     []TareChannel // weight/buoyancy tare against the angle, per channel
	Balance  *Balance      // balance interaction matrix; nil: channels are summed as they are
	Blockage *Blockage     // solid and wake blockage; nil: no blockage correction
}

// Conditions are the fixed fluid conditions used when no channel gives them.
// Parse fills the defaults: ISA sea level (288.15 K, 101 325 Pa, dry) for air,
// 288.15 K for water, and standard seawater salinity for sea water.
type Conditions struct {
	TempK           float64 // fluid temperature, K
	PressurePa      float64 // ambient static pressure, Pa
	RelHumidity     float64 // relative humidity of air, fraction 0..1
	SalinityKgPerKg float64 // absolute salinity of sea water, kg/kg (0.035 165 04 for standard seawater)
}

// Reference holds the reference geometry that coefficients are made on.
// AreaM2 must be the area the design data uses (planform for foils, frontal
// for spheres, projected for rotors); AreaKind records which it is.
type Reference struct {
	AreaM2   float64 // reference area S, m²
	AreaUM2  float64 // standard uncertainty of S, m² (0: no area tolerance given)
	AreaKind string  // "planform", "frontal", "projected", "tributary" (free text, shown in reports)
	LengthM  float64 // reference length (chord) for Re and C_M, m
	SpanM    float64 // span, m (aspect ratio = span²/area)
	RadiusM  float64 // rotor radius for the spin ratio, m
	RadiusUM float64 // standard uncertainty of RadiusM, m (key radius_u_m; 0: none given)
}

// AspectRatio returns b²/S, or 0 when span or area is missing.
func (r Reference) AspectRatio() float64 {
	if r.SpanM <= 0 || r.AreaM2 <= 0 {
		return 0
	}
	return r.SpanM * r.SpanM / r.AreaM2
}

// SourceType says how a source reaches liftyard.
type SourceType string

// The source types.
const (
	SourceSerial    SourceType = "serial"
	SourceMQTT      SourceType = "mqtt"
	SourceSimulated SourceType = "simulated"
)

// Source is one stream of raw readings.
type Source struct {
	Name     string
	Type     SourceType
	Port     string   // serial device path (prefer /dev/serial/by-id/... links: stable across re-plugs)
	Baud     int      // serial baud rate (default 115200)
	DataBits int      // serial data bits, 5–8 (default 8)
	Parity   string   // serial parity: "none" (default), "even" or "odd"
	StopBits int      // serial stop bits, 1 (default) or 2
	Format   string   // serial: "frame" (our CRC frame) or "delimited"
	Channels []string // serial frame: channel names in frame order
	// Delimiter separates the fields of a delimited line (default ",").
	Delimiter string
	// Columns names the fields of a delimited line in order: a channel name,
	// "_" to skip the field, or one of "t_us", "t_ms", "t_s" for a device
	// time column. Without a time column the host receive time is used.
	Columns  []string
	Broker   string // mqtt: broker URL, e.g. tcp://127.0.0.1:1883 (ssl:// or tls:// for TLS)
	Topic    string // mqtt: topic carrying JSON blocks
	ClientID string // mqtt: stable client id (default "liftyard-<source name>")
	Username string // mqtt: user name (optional)
	// PasswordEnv names the environment variable that holds the MQTT
	// password; the password itself never appears in a rig file or a log.
	PasswordEnv string
	CAFile      string  // mqtt: PEM file of the CA that signed the broker's certificate (TLS)
	RateHz      float64 // simulated: sample rate, Hz (default 200)
}

// Publish says where live results go for other consumers on a site (docs/design.md
// §7): an existing MQTT broker, under a topic prefix.
type Publish struct {
	Broker      string // broker URL, tcp://host:port (ssl:// or tls:// for TLS)
	TopicPrefix string // results go to <prefix>/live and <prefix>/segments
	ClientID    string // stable client id (default "liftyard-publish-<rig name>")
	Username    string
	PasswordEnv string // environment variable holding the password
	CAFile      string // PEM CA bundle for TLS
}

// Channel is one measured quantity.
type Channel struct {
	Name     string
	Quantity Quantity
	// Unit is the unit that the calibration polynomial produces, as written
	// in the file ("N", "kgf", "Pa", "deg", ...). ToSI converts it.
	Unit string
	// ToSI converts a value in Unit to SI: si = Scale·v + Offset.
	ToSI Affine
	// CapacitySI is the rated capacity in SI units (N, Pa, ...); 0 = not rated.
	CapacitySI float64
	// RawMin and RawMax are the limits of the raw reading (an ADC's full
	// scale, e.g. −8388608 and 8388607 for 24 bits): a reading at either
	// limit is saturated. Both zero: not known.
	RawMin, RawMax float64
	Calibration    Calibration
}

// Affine is a linear unit conversion si = Scale·v + Offset.
type Affine struct{ Scale, Offset float64 }

// Apply converts v.
func (a Affine) Apply(v float64) float64 { return a.Scale*v + a.Offset }

// Calibration is a channel's calibration as the rig file states it: either an
// inline polynomial reading → value (in the channel's Unit), or the id of a
// stored calibration record.
type Calibration struct {
	Poly []float64 // c0, c1, ... ascending powers; value = Σ c_k·reading^k, in Unit
	U    float64   // standard uncertainty of one calibrated value, in Unit
	// SpanURel is the relative standard uncertainty of the calibration's
	// span (its slope): a span error scales with the value, u = SpanURel·|value|,
	// on top of U. Rig key span_u_pct (in %), default 0.
	SpanURel float64
	ID       string // stored calibration id; empty for inline
}

// Lift says how channels combine into forces, flow and angle.
type Lift struct {
	Normal []string // channels summed into the normal force (body axes)
	Axial  []string // channels summed into the axial force (body axes)
	Moment string   // pitching-moment channel (optional)

	AngleChannel string  // angle-of-attack channel, or empty when fixed
	AngleRad     float64 // fixed angle of attack when AngleChannel is empty, rad
	AngleURad    float64 // standard uncertainty of the angle, rad

	DynamicPressure string  // pitot-static Δp channel (q = Δp)
	PitotCoeff      float64 // pitot coefficient C: V = C·√(2Δp/ρ), so q = C²·Δp (default 1)
	PitotCoeffU     float64 // standard uncertainty of C (rig key pitot_coefficient_u, default 0)
	Speed           string  // speed channel (q = ½ρV²) when there is no pitot
	Spin            string  // rotation channel for rotors
	Direction       string  // wind direction channel for roofs
	Temperature     string  // fluid temperature channel (optional)
	Design          string  // design-curve CSV path (optional)
	// DesignDir is the folder the design CSV must be in: the rig file's
	// (set by Parse when it reads a file; "" for a rig parsed from text,
	// whose design is then looked up in the working directory). See
	// OpenDesign.
	DesignDir string
	// DesignAlphaZeroRad is the zero-lift angle of the "thin-airfoil"
	// design, rad (key design_alpha_zero_deg; default 0, a symmetric
	// section; negative for positive camber). A design CSV states its own.
	DesignAlphaZeroRad float64
}

// Tap is one roof pressure tap.
type Tap struct {
	Name    string
	Channel string
	AreaM2  float64 // tributary area, m²
	Zone    string
	XM, YM  float64 // position on the roof, m
}

// Zone is a roof zone with its design net pressure coefficient.
type Zone struct {
	Name     string
	DesignCp float64 // design net Cp of the zone
	DesignU  float64 // expanded (95 %) uncertainty of DesignCp
	// DesignValue says what DesignCp is (key design_value): DesignMean (the
	// default, a mean coefficient) or DesignPeak (a peak coefficient: a
	// negative one is compared with the block's peak suction, a positive
	// one with its peak positive pressure).
	DesignValue string
	// DesignQ is the velocity pressure DesignCp pairs with (key design_q):
	// DesignMean (the default, the mean q at the reference height) or
	// DesignPeak (the peak velocity pressure q_p = (1 + 7·I_v)·q̄,
	// EN 1991-1-4:2005 eq. 4.8).
	DesignQ string
}

// What a zone's design value is and the q it pairs with.
const (
	DesignMean = "mean"
	DesignPeak = "peak"
)

// Internal is the roof's internal pressure: a channel or a fixed coefficient.
type Internal struct {
	Channel string
	Cp      float64
	HasCp   bool
}

// Channel returns the channel with the given name.
func (r *Rig) Channel(name string) (Channel, bool) {
	for _, c := range r.Channels {
		if c.Name == name {
			return c, true
		}
	}
	return Channel{}, false
}

// UnitScale is the factor from channel name's Unit to SI (ToSI.Scale; the
// offset of a temperature unit is left out, as a difference needs), or 1
// for a channel the rig does not declare.
func (r *Rig) UnitScale(name string) float64 {
	if ch, ok := r.Channel(name); ok && ch.ToSI.Scale != 0 {
		return ch.ToSI.Scale
	}
	return 1
}

// Deg converts radians to degrees, for display and export (radians inside,
// degrees only at the boundary). Deg and Rad are liftyard's one pair of
// angle converters; a slope per rad times Rad(1) is a slope per degree.
func Deg(rad float64) float64 { return rad * 180 / math.Pi }

// Rad converts degrees to radians, where a degree enters: a flag, a design
// curve's alpha_deg, a tolerance written in degrees.
func Rad(deg float64) float64 { return deg * math.Pi / 180 }

// localName returns name relative to dir when it lies in dir or below it
// (an absolute path inside dir counts), cleaned; ok is false for a name
// that leaves dir.
func localName(dir, name string) (string, bool) {
	if filepath.IsAbs(name) {
		abs, err := filepath.Abs(dir)
		if err != nil {
			return "", false
		}
		if name, err = filepath.Rel(abs, name); err != nil {
			return "", false
		}
	}
	return filepath.Clean(name), filepath.IsLocal(name)
}

// OpenDesign opens the design CSV l names, inside l.DesignDir: a name
// that leaves the folder, by .. or through a symbolic link, is refused
// (os.Root), so a rig file cannot make liftyard read a file elsewhere.
func (l Lift) OpenDesign() (*os.File, error) {
	name := l.Design
	if l.DesignDir != "" {
		rel, err := filepath.Rel(l.DesignDir, l.Design)
		if err != nil {
			return nil, fmt.Errorf("design file: %w", err)
		}
		name = rel
	}
	return OpenInDir(l.DesignDir, name)
}

// OpenInDir opens the file name inside dir ("" is the working
// directory), refusing a name that leaves dir by .. , by an absolute path
// or through a symbolic link. Its errors name the file, never its content.
func OpenInDir(dir, name string) (*os.File, error) {
	if dir == "" {
		dir = "."
	}
	root, err := os.OpenRoot(dir)
	if err != nil {
		return nil, fmt.Errorf("design file %q: %w", Excerpt(name), err)
	}
	defer root.Close()
	f, err := root.Open(name)
	if err != nil {
		var pe *os.PathError
		if errors.As(err, &pe) {
			err = pe.Err
		}
		return nil, fmt.Errorf("design file %q (it must be in the rig file's folder or below it): %w", Excerpt(name), err)
	}
	return f, nil
}

package rig

import (
	"math"
	"time"
)

// Wind describes a roof rig's approach wind and how its record is cut into
// blocks (rig table [wind]; docs/rig-file.md "Wind"). Every key is
// optional: a zero Wind is a 10-minute block, q at the mast height and
// 30° direction sectors, the meaning of rig files written before [wind]
// existed.
type Wind struct {
	// Block is the result block length (key block = "10m"; 0 = the default,
	// DefaultRoofBlock). A command-line --block overrides it.
	Block time.Duration
	// MastHeightM is the height of the reference pitot above ground, m
	// (key mast_height_m; 0 = not declared).
	MastHeightM float64
	// ReferenceHeightM is the height the pressure coefficients are
	// referred to, m (key reference_height_m; 0 = none: q stays at the mast).
	ReferenceHeightM float64
	// Profile is the mean-wind profile that carries q from the mast to the
	// reference height: ProfileLog or ProfilePower (key profile).
	Profile string
	// RoughnessM is the roughness length z0 of the log law, m (key
	// roughness_m).
	RoughnessM float64
	// Exponent is the power-law exponent α of V(z) ∝ z^α (key exponent).
	Exponent float64
	// ProfileURel is the relative standard uncertainty of the q ratio
	// (key profile_u_pct, in %; 0 = from the profile's parameter:
	// z0 within a factor 2, or α ± 0.05, rectangular).
	ProfileURel float64
	// SectorRad is the width of a direction sector, rad (key sector_deg,
	// default 30°; sectors are centred on 0°, 30°, …).
	SectorRad float64
}

// Profiles of the mean wind speed with height.
const (
	ProfileLog   = "log"   // V(z) ∝ ln(z/z0) (EN 1991-1-4:2005 §4.3.2)
	ProfilePower = "power" // V(z) ∝ z^α
)

// DefaultRoofBlock is the result block length of a roof run when neither
// the rig file nor a flag sets one (10 min, common practice for wind
// records).
const DefaultRoofBlock = 10 * time.Minute

// DefaultSectorRad is the direction sector width when [wind] sector_deg is
// absent (30°, twelve sectors: common practice).
var DefaultSectorRad = Rad(30)

var windKeys = []string{"block", "mast_height_m", "reference_height_m", "profile", "roughness_m", "exponent", "profile_u_pct", "sector_deg"}

// Converts reports whether q is carried from the mast to another height.
func (w Wind) Converts() bool {
	return w.ReferenceHeightM > 0 && w.MastHeightM > 0 && w.ReferenceHeightM != w.MastHeightM
}

// QRatio returns q(z_ref)/q(z_mast) for the mean velocity pressure and its
// relative standard uncertainty, 1 and 0 when there is no conversion:
//
//	log law:   r = [ln(z_ref/z0) / ln(z_mast/z0)]²   (EN 1991-1-4:2005 eq. 4.4, k_r cancels)
//	power law: r = (z_ref/z_mast)^{2α}
//
// The default uncertainty takes ln z0 rectangular within ± ln 2, or α
// rectangular within ± 0.05 (common practice, docs/references.md §20),
// through ∂ln r/∂ln z0 = 2[1/ln(z_mast/z0) − 1/ln(z_ref/z0)] and
// ∂ln r/∂α = 2 ln(z_ref/z_mast).
func (w Wind) QRatio() (ratio, uRel float64) {
	if !w.Converts() {
		return 1, 0
	}
	zr, zm := w.ReferenceHeightM, w.MastHeightM
	switch w.Profile {
	case ProfileLog:
		lr, lm := math.Log(zr/w.RoughnessM), math.Log(zm/w.RoughnessM)
		ratio = (lr / lm) * (lr / lm)
		uRel = 2 * math.Abs(1/lm-1/lr) * math.Ln2 / math.Sqrt(3)
	case ProfilePower:
		ratio = math.Pow(zr/zm, 2*w.Exponent)
		uRel = 2 * math.Abs(math.Log(zr/zm)) * 0.05 / math.Sqrt(3)
	default:
		return math.NaN(), math.NaN()
	}
	if w.ProfileURel > 0 {
		uRel = w.ProfileURel
	}
	return ratio, uRel
}

// wind reads [wind]; t is nil when the table is absent.
func (d *decoder) wind(t *table) Wind {
	w := Wind{SectorRad: DefaultSectorRad}
	if t == nil {
		return w
	}
	t.subject = "wind"
	if s, ok := t.str("block"); ok {
		b, err := time.ParseDuration(s)
		if err != nil || b <= 0 {
			t.errf("block", ErrValue, "block %q must be a positive duration such as \"10m\" or \"30s\"", s)
		} else {
			w.Block = b
		}
	}
	pos := func(key string) float64 {
		v, ok := t.num(key)
		if ok && !(v > 0) {
			t.errf(key, ErrValue, "%s %g must be positive", key, v)
			return 0
		}
		return v
	}
	w.MastHeightM = pos("mast_height_m")
	w.ReferenceHeightM = pos("reference_height_m")
	w.RoughnessM = pos("roughness_m")
	if v, ok := t.num("exponent"); ok {
		if !(v > 0 && v < 1) {
			t.errf("exponent", ErrValue, "exponent %g must lie between 0 and 1 (about 0.1 over open sea to 0.3 over a city)", v)
		} else {
			w.Exponent = v
		}
	}
	if v := pos("profile_u_pct"); v > 0 {
		w.ProfileURel = v / 100
	}
	if v := pos("sector_deg"); v > 0 {
		if v > 180 {
			t.errf("sector_deg", ErrValue, "sector_deg %g must be at most 180", v)
		} else {
			w.SectorRad = Rad(v)
		}
	}
	if p, ok := t.word("profile", []string{ProfileLog, ProfilePower}); ok {
		w.Profile = p
	}
	if w.ReferenceHeightM > 0 {
		switch {
		case w.MastHeightM == 0:
			t.errf("reference_height_m", ErrMissing, "reference_height_m needs mast_height_m (add mast_height_m = the pitot's height above ground, m)")
		case w.ReferenceHeightM == w.MastHeightM:
		case w.Profile == "":
			t.errf("reference_height_m", ErrMissing, "reference_height_m needs a profile to carry q from the mast (add profile = \"log\" with roughness_m, or \"power\" with exponent)")
		case w.Profile == ProfileLog && w.RoughnessM == 0:
			t.errf("profile", ErrMissing, "profile = \"log\" needs roughness_m (the terrain's roughness length z0, e.g. 0.05 for open country)")
		case w.Profile == ProfileLog && (w.RoughnessM >= w.MastHeightM || w.RoughnessM >= w.ReferenceHeightM):
			t.errf("roughness_m", ErrValue, "roughness_m %g must be below both heights", w.RoughnessM)
		case w.Profile == ProfilePower && w.Exponent == 0:
			t.errf("profile", ErrMissing, "profile = \"power\" needs exponent (α of V ∝ z^α, e.g. 0.16)")
		}
	}
	t.unknown()
	return w
}

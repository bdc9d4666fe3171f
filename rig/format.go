package rig

import (
	"fmt"
	"path/filepath"
	"strconv"
	"strings"
)

// Format writes r as a rig file that Parse reads back to an equal Rig (up to
// the rounding of unit conversions, about 1e-15 relative). Values are
// written in SI, with the file's own units kept where the Rig keeps them
// (a channel's unit and calibration). Use it to store the rig with a run.
func Format(r *Rig) []byte {
	var b strings.Builder
	w := func(format string, args ...any) { fmt.Fprintf(&b, format, args...) }
	w("name = %s\nkind = %s\nfluid = %s\n", quote(r.Name), quote(string(r.Kind)), quote(string(r.Fluid)))

	c := r.Conditions
	w("\n[conditions]\ntemperature_c = %s\npressure_pa = %s\n", num(c.TempK-273.15), num(c.PressurePa))
	if c.RelHumidity != 0 {
		w("humidity_pct = %s\n", num(c.RelHumidity*100))
	}
	if c.SalinityKgPerKg != 0 {
		w("salinity_g_per_kg = %s\n", num(c.SalinityKgPerKg*1000))
	}

	ref := r.Reference
	w("\n[reference]\n")
	for _, kv := range []struct {
		k string
		v float64
	}{{"area_m2", ref.AreaM2}, {"area_u_m2", ref.AreaUM2}, {"length_m", ref.LengthM}, {"span_m", ref.SpanM}, {"radius_m", ref.RadiusM}, {"radius_u_m", ref.RadiusUM}} {
		if kv.v != 0 {
			w("%s = %s\n", kv.k, num(kv.v))
		}
	}
	if ref.AreaKind != "" {
		w("area_kind = %s\n", quote(ref.AreaKind))
	}

	for _, s := range r.Sources {
		w("\n[[source]]\nname = %s\ntype = %s\n", quote(s.Name), quote(string(s.Type)))
		switch s.Type {
		case SourceSerial:
			w("port = %s\nbaud = %d\ndata_bits = %d\nparity = %s\nstop_bits = %d\nformat = %s\n",
				quote(s.Port), s.Baud, s.DataBits, quote(s.Parity), s.StopBits, quote(s.Format))
			if s.Format == "delimited" {
				w("delimiter = %s\n", quote(s.Delimiter))
			}
			if s.Columns != nil {
				w("columns = %s\n", strList(s.Columns))
			}
		case SourceMQTT:
			w("broker = %s\ntopic = %s\n", quote(s.Broker), quote(s.Topic))
			for _, kv := range [][2]string{{"client_id", s.ClientID}, {"username", s.Username}, {"password_env", s.PasswordEnv}, {"ca_file", s.CAFile}} {
				if kv[1] != "" {
					w("%s = %s\n", kv[0], quote(kv[1]))
				}
			}
		case SourceSimulated:
			w("rate_hz = %s\n", num(s.RateHz))
		}
		if s.Channels != nil {
			w("channels = %s\n", strList(s.Channels))
		}
	}

	for _, ch := range r.Channels {
		w("\n[[channel]]\nname = %s\nquantity = %s\nunit = %s\n", quote(ch.Name), quote(string(ch.Quantity)), quote(ch.Unit))
		if ch.CapacitySI != 0 {
			w("capacity = %s\n", quote(num(ch.CapacitySI)+" "+ch.Quantity.SIUnit()))
		}
		if ch.RawMin != 0 || ch.RawMax != 0 {
			w("raw_range = [%s, %s]\n", num(ch.RawMin), num(ch.RawMax))
		}
		cal := ch.Calibration
		span := ""
		if cal.SpanURel != 0 {
			span = ", span_u_pct = " + num(100*cal.SpanURel)
		}
		switch {
		case cal.ID != "":
			w("calibration = { id = %s%s }\n", quote(cal.ID), span)
		case cal.Poly != nil:
			parts := make([]string, len(cal.Poly))
			for i, p := range cal.Poly {
				parts[i] = num(p)
			}
			w("calibration = { poly = [%s], u = %s%s }\n", strings.Join(parts, ", "), num(cal.U), span)
		}
	}

	l := r.Lift
	w("\n[lift]\n")
	if l.Normal != nil {
		w("normal = %s\n", strList(l.Normal))
	}
	if l.Axial != nil {
		w("axial = %s\n", strList(l.Axial))
	}
	if l.AngleChannel != "" {
		w("angle = %s\n", quote(l.AngleChannel))
	} else {
		w("angle = %s\n", num(Deg(l.AngleRad)))
	}
	w("angle_u_deg = %s\npitot_coefficient = %s\n", num(Deg(l.AngleURad)), num(l.PitotCoeff))
	if l.PitotCoeffU != 0 {
		w("pitot_coefficient_u = %s\n", num(l.PitotCoeffU))
	}
	design := l.Design
	if l.DesignDir != "" { // written as the rig file gave it: relative to its folder
		if rel, err := filepath.Rel(l.DesignDir, design); err == nil {
			design = filepath.ToSlash(rel)
		}
	}
	for _, kv := range [][2]string{{"moment", l.Moment}, {"dynamic_pressure", l.DynamicPressure}, {"speed", l.Speed},
		{"spin", l.Spin}, {"direction", l.Direction}, {"temperature", l.Temperature}, {"design", design}} {
		if kv[1] != "" {
			w("%s = %s\n", kv[0], quote(kv[1]))
		}
	}
	if l.DesignAlphaZeroRad != 0 {
		w("design_alpha_zero_deg = %s\n", num(Deg(l.DesignAlphaZeroRad)))
	}

	for _, t := range r.Taps {
		w("\n[[tap]]\nname = %s\nchannel = %s\narea_m2 = %s\nzone = %s\nx_m = %s\ny_m = %s\n",
			quote(t.Name), quote(t.Channel), num(t.AreaM2), quote(t.Zone), num(t.XM), num(t.YM))
	}
	for _, z := range r.Zones {
		w("\n[[zone]]\nname = %s\ndesign_cp = %s\ndesign_u = %s\n", quote(z.Name), num(z.DesignCp), num(z.DesignU))
	}
	if r.Internal.Channel != "" || r.Internal.HasCp {
		w("\n[internal]\n")
		if r.Internal.Channel != "" {
			w("channel = %s\n", quote(r.Internal.Channel))
		}
		if r.Internal.HasCp {
			w("cp = %s\n", num(r.Internal.Cp))
		}
	}
	if p := r.Publish; p != nil {
		w("\n[publish]\nbroker = %s\ntopic_prefix = %s\n", quote(p.Broker), quote(p.TopicPrefix))
		for _, kv := range [][2]string{{"client_id", p.ClientID}, {"username", p.Username}, {"password_env", p.PasswordEnv}, {"ca_file", p.CAFile}} {
			if kv[1] != "" {
				w("%s = %s\n", kv[0], quote(kv[1]))
			}
		}
	}
	formatCorrections(w, r)
	return []byte(b.String())
}

// num writes a float so that TOML reads it back bit for bit.
func num(f float64) string {
	s := strconv.FormatFloat(f, 'g', -1, 64)
	if !strings.ContainsAny(s, ".eEn") { // "5" is a TOML integer: fine, but keep floats floats
		s += ".0"
	}
	return s
}

// quote writes a TOML basic string.
func quote(s string) string {
	var b strings.Builder
	b.WriteByte('"')
	for _, r := range s { // Parse only keeps valid UTF-8: TOML refuses anything else
		switch {
		case r == '"':
			b.WriteString(`\"`)
		case r == '\\':
			b.WriteString(`\\`)
		case r < 0x20 || r == 0x7f:
			fmt.Fprintf(&b, `\u%04X`, r)
		default:
			b.WriteRune(r)
		}
	}
	b.WriteByte('"')
	return b.String()
}

func strList(xs []string) string {
	parts := make([]string, len(xs))
	for i, x := range xs {
		parts[i] = quote(x)
	}
	return "[" + strings.Join(parts, ", ") + "]"
}

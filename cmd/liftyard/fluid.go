package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"text/tabwriter"

	"liftyard/estimate"
	"liftyard/rig"
)

// fluidResult is the --json output of `liftyard fluid` (units in the names).
type fluidResult struct {
	Fluid          string   `json:"fluid"`
	TemperatureC   float64  `json:"temperature_c"`
	PressurePa     float64  `json:"pressure_pa,omitempty"`
	HumidityPct    *float64 `json:"humidity_pct,omitempty"`
	SalinityGPerKg *float64 `json:"salinity_g_per_kg,omitempty"`
	RhoKgM3        float64  `json:"rho_kg_m3"`
	MuPaS          float64  `json:"mu_pa_s"`
	NuM2S          float64  `json:"nu_m2_s"`
	Method         string   `json:"method"`
	Notes          []string `json:"notes,omitempty"`
}

// runFluid is `liftyard fluid --fluid air|fresh_water|sea_water [--temperature-c T]
// [--pressure-pa P] [--humidity-pct RH] [--salinity-g-per-kg S] [--json]`.
func runFluid(_ context.Context, args []string, stdout, _ io.Writer) error {
	fs := newFlags("fluid", "--fluid air|fresh_water|sea_water [--temperature-c T] [--pressure-pa P] [--humidity-pct RH] [--salinity-g-per-kg S] [--json]",
		"print density and viscosity of air or water at given conditions", stdout)
	fluid := fs.String("fluid", "", "air, fresh_water or sea_water")
	tempC := fs.Float64("temperature-c", 15, "temperature, °C")
	pressPa := fs.Float64("pressure-pa", 101325, "absolute pressure, Pa (air only; water is taken at 1 atm)")
	humPct := fs.Float64("humidity-pct", 0, "relative humidity, % (air only; 0 = dry air)")
	salt := fs.Float64("salinity-g-per-kg", 1000*rig.StandardSeawaterSalinityKgPerKg, "absolute salinity, g/kg (sea_water only)")
	asJSON := fs.Bool("json", false, "print JSON")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usagef("unexpected argument %q (see liftyard fluid --help)", pos[0])
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	f := rig.Fluid(*fluid)
	res := fluidResult{Fluid: *fluid, TemperatureC: *tempC}
	c := rig.Conditions{TempK: *tempC + 273.15}
	switch f {
	case rig.FluidAir:
		if set["salinity-g-per-kg"] {
			return usagef("--salinity-g-per-kg applies to sea_water only")
		}
		c.PressurePa, c.RelHumidity = *pressPa, *humPct/100
		res.PressurePa, res.HumidityPct = *pressPa, humPct
		res.Method = "density: CIPM-2007 (Picard et al., Metrologia 45, 2008), x_CO2 = 0.0004; viscosity: Sutherland's law (US Standard Atmosphere 1976 eq. 51)"
		if !(*tempC >= 15 && *tempC <= 27) || !(*pressPa >= 60e3 && *pressPa <= 110e3) {
			res.Notes = append(res.Notes, "outside the stated range of CIPM-2007 (15–27 °C, 600–1100 hPa): the density is extrapolated")
		}
		if !set["humidity-pct"] {
			res.Notes = append(res.Notes, "dry air assumed: give --humidity-pct for moist air")
		}
	case rig.FluidFreshWater, rig.FluidSeaWater:
		if set["humidity-pct"] {
			return usagef("--humidity-pct applies to air only")
		}
		if set["pressure-pa"] {
			res.Notes = append(res.Notes, "water properties are at 1 atm: --pressure-pa is not used")
		}
		res.Method = "ITTC Recommended Procedure 7.5-02-01-03 (2011) tables (IAPWS-95/IAPWS-2008; TEOS-10 seawater), interpolated in temperature"
		if f == rig.FluidSeaWater {
			c.SalinityKgPerKg = *salt / 1000
			res.SalinityGPerKg = salt
			if *salt != 1000*rig.StandardSeawaterSalinityKgPerKg {
				res.Notes = append(res.Notes, "non-standard salinity: scaled from the ITTC standard-seawater table by the EOS-80 salinity dependence")
			}
			if !(*salt > 0) {
				return usagef("--salinity-g-per-kg %g: want a salinity above 0 (use --fluid fresh_water for fresh water)", *salt)
			}
		} else if set["salinity-g-per-kg"] {
			return usagef("--salinity-g-per-kg applies to sea_water only")
		}
	case "":
		return usagef("--fluid is required: air, fresh_water or sea_water")
	default:
		return usagef("--fluid %q: want air, fresh_water or sea_water", *fluid)
	}
	props, err := estimate.Properties(f, c)
	if err != nil {
		if errors.Is(err, estimate.ErrConditions) {
			return usagef("%v", err)
		}
		return err
	}
	res.RhoKgM3, res.MuPaS, res.NuM2S = props.RhoKgPerM3, props.MuPaS, props.NuM2PerS
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(res)
	}
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "fluid\t%s\n", res.Fluid)
	fmt.Fprintf(tw, "temperature\t%g °C\n", res.TemperatureC)
	if f == rig.FluidAir {
		fmt.Fprintf(tw, "pressure\t%g Pa\n", res.PressurePa)
		fmt.Fprintf(tw, "humidity\t%g %%\n", *res.HumidityPct)
	}
	if res.SalinityGPerKg != nil {
		fmt.Fprintf(tw, "salinity\t%g g/kg\n", *res.SalinityGPerKg)
	}
	fmt.Fprintf(tw, "density\t%.7g kg/m³\t(rho_kg_m3)\n", res.RhoKgM3)
	fmt.Fprintf(tw, "dynamic viscosity\t%.5g Pa·s\t(mu_pa_s)\n", res.MuPaS)
	fmt.Fprintf(tw, "kinematic viscosity\t%.5g m²/s\t(nu_m2_s)\n", res.NuM2S)
	fmt.Fprintf(tw, "method\t%s\n", res.Method)
	for _, n := range res.Notes {
		fmt.Fprintf(tw, "note\t%s\n", n)
	}
	return tw.Flush()
}

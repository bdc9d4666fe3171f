// Package rig reads and checks rig files: the TOML description of one
// experiment — the body, the fluid, the sensors, and how their readings
// combine into lift. It is the vocabulary every other liftyard package
// imports; it imports only the standard library and BurntSushi/toml.
//
// # The file
//
// A short but complete foil rig:
//
//	name  = "fin-a"
//	kind  = "foil"            # foil | roof | rotor | body
//	fluid = "fresh_water"     # air | fresh_water | sea_water
//
//	[conditions]
//	temperature_c = 14.0      # defaults: 15 °C, 101325 Pa, dry air; sea water 35.16504 g/kg
//
//	[reference]
//	area_m2  = 0.09           # planform area
//	length_m = 0.15           # chord
//	span_m   = 0.60
//
//	[[source]]
//	name   = "carriage"
//	type   = "mqtt"           # serial | mqtt | simulated
//	broker = "tcp://127.0.0.1:1883"
//	topic  = "liftyard/fin-a/raw"
//
//	[[channel]]
//	name        = "n1"
//	quantity    = "force"
//	unit        = "N"         # the unit the calibration produces
//	capacity    = "500 N"     # rated range: a string with a unit, or a number in unit
//	calibration = { poly = [-12.5, 0.0025], u = 0.15 }   # value = Σ c_k·reading^k; u in unit
//
//	[[channel]]
//	name        = "pitot"
//	quantity    = "pressure"
//	unit        = "Pa"
//	capacity    = "5 kPa"
//	calibration = { id = "pitot-2026-11" }                # a stored calibration
//
//	[lift]
//	normal           = ["n1"]
//	dynamic_pressure = "pitot"
//	angle            = 4.0    # a channel name, or fixed degrees
//
// Roof rigs add [[tap]] (name, channel, area_m2, zone, x_m, y_m), [[zone]]
// (name, design_cp, design_u) and [internal] (channel or cp). Rotor rigs add
// [reference] radius_m and [lift] spin. docs/rig-file.md is the full
// reference; testdata/rigs holds two worked examples.
//
// # Units
//
// Units are converted once, at the file boundary; a Rig holds SI only (Pa,
// N, N·m, m/s, rad, K, rad/s, fraction, V). A key whose name ends in a unit
// (area_m2, temperature_c, angle_u_deg) takes a bare number in that unit.
// Other values with a dimension carry their unit in a string ("2 kN",
// "12.5 mbar", "59 °F"; see ParseQuantity) or in the channel's unit key.
// A bare number where a unit is needed is refused. Accepted units per
// quantity are listed by Units; the factors follow NIST SP 811 (2008),
// Appendix B. "inH2O" is the conventional inch of water (249.0889 Pa);
// inH2O_39F and inH2O_60F are the temperature-referenced ones. Deg and Rad
// are liftyard's one pair of angle converters, for the boundaries.
//
// # Errors
//
// Parse reports every problem in a file at once, as Errors sorted by line.
// Each *Error carries file, line, column and TOML key path, prints as
//
//	rig.toml:14:1: channel "n_fore": unknown unit "kgs" (use N, kN, kgf or lbf)
//
// and unwraps to one sentinel (ErrSyntax, ErrUnknownKey, ErrMissing,
// ErrUnit, ErrValue, ErrReference, ErrDuplicate). Parse never panics on
// input. *Error is liftyard's one positioned error: the raw CSV, design
// curve and calibration points readers downstream return it too, each with
// its own sentinel, and the command line answers it with exit status 2.
//
// # Caution
//
// A rig file describes a test; it approves nothing. Load rigs only within the
// rated capacities written here, and leave structural decisions (roofs,
// cladding, towed structures) to the local building code and a licensed
// engineer.
package rig

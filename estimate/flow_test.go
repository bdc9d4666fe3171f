package estimate_test

import (
	"math"
	"testing"

	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// Ensure that the pitot inversions of docs/references.md §7 are reproduced
// (Bernoulli, incompressible, [R]).
func TestSpeedFromQ(t *testing.T) {
	tests := []struct {
		name     string
		qPa, rho float64
		want     float64
	}{
		{"100 Pa in ISA air", 100, 1.225, 12.77753},
		{"500 Pa in 20 °C 50 % air", 500, 1.1993, 28.87594},
		{"1000 Pa in 20 °C fresh water", 1000, 998.2072, 1.41548},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			near(t, "V", estimate.SpeedFromQ(tc.qPa, tc.rho), tc.want, 5e-6)
			near(t, "q round trip", estimate.DynamicPressure(tc.rho, tc.want), tc.qPa, tc.qPa*1e-5) // V printed to 6 digits
		})
	}
	// docs/references.md §7 table: ½ρV² at ISA for 10, 30, 50, 70 m/s [R].
	for _, r := range []struct{ v, q float64 }{{10, 61.250}, {30, 551.250}, {50, 1531.250}, {70, 3001.250}} {
		near(t, "½ρV²", estimate.DynamicPressure(1.225, r.v), r.q, 5e-4)
	}
	if v := estimate.SpeedFromQ(-100, 1.225); !(v < 0) {
		t.Errorf("negative q should give negative speed, got %g", v)
	}
	if v := estimate.SpeedFromQ(100, 0); !math.IsNaN(v) {
		t.Errorf("ρ = 0 should give NaN, got %g", v)
	}
}

// Ensure that the pitot coefficient enters squared: q = Δp/C² (C = 1 standard
// tube, common practice; C = 0.84 S-type, from memory).
func TestDynamicPressureFromPitot(t *testing.T) {
	near(t, "C=1", estimate.DynamicPressureFromPitot(250, 1), 250, 0)
	near(t, "C=0 means 1", estimate.DynamicPressureFromPitot(250, 0), 250, 0)
	// An S-type probe with C = 0.84 reads a Δp larger than q: the coefficient
	// multiplies the velocity, V = C·√(2Δp/ρ) (US EPA Method 2, 40 CFR 60
	// App. A, writes v = K_p·C_p·√(Δp·T/(P·M)); from memory).
	near(t, "C=0.84", estimate.DynamicPressureFromPitot(250, 0.84), 250*0.84*0.84, 1e-9)
	if q := estimate.DynamicPressureFromPitot(250, -1); !math.IsNaN(q) {
		t.Errorf("negative C gave %g, want NaN", q)
	}
	// Re = ρVL/μ; ISA air, 20 m/s, 0.2 m chord: ν0 = 1.4607e-5 m²/s (docs/references.md §1.1 [R]).
	near(t, "Re", estimate.Reynolds(1.225, 20, 0.2, 1.7894e-5), 20*0.2/1.4607e-5, 30) // ν0 printed to 5 digits
}

// Ensure that the body-to-wind rotation keeps the resultant (L²+D² = N²+A²),
// reduces to L = N, D = A at α = 0, and keeps the sign of lift.
func TestWindAxes(t *testing.T) {
	for _, a := range []float64{-0.5, -0.1, 0, 0.05, 0.2, 0.7, 1.5} {
		for _, f := range [][2]float64{{100, 5}, {-40, 3}, {0, -2}, {12.5, 12.5}} {
			l, d := estimate.WindAxes(f[0], f[1], a)
			near(t, "resultant", l*l+d*d, f[0]*f[0]+f[1]*f[1], 1e-9*(1+f[0]*f[0]))
		}
	}
	l, d := estimate.WindAxes(100, 5, 0)
	near(t, "L at 0", l, 100, 0)
	near(t, "D at 0", d, 5, 0)
	// Symmetric foil: N(−α) = −N(α), A(−α) = A(α) ⇒ L(−α) = −L(α), D(−α) = D(α).
	for _, a := range []float64{0.05, 0.1, 0.2} {
		n, ax := 300*math.Sin(a), 4+20*a*a
		lp, dp := estimate.WindAxes(n, ax, a)
		lm, dm := estimate.WindAxes(-n, ax, -a)
		near(t, "L odd", lm, -lp, 1e-12)
		near(t, "D even", dm, dp, 1e-12)
	}
}

// Ensure the finite-wing slopes of docs/references.md §6.3 ([R] from the formulas,
// which are [M]: lifting line and Helmbold as recalled, not checked in print).
func TestLiftSlopes(t *testing.T) {
	a0PerRad := 0.105 / rig.Rad(1) // 0.105 per degree (NACA 2412, Abbott & von Doenhoff via Anderson 1999)
	tests := []struct {
		name string
		got  float64
		want float64
	}{
		{"lifting line AR 6, 2π", estimate.LiftingLineSlope(estimate.ThinAirfoilSlopePerRad, 6), 4.7124},
		{"Helmbold AR 6, 2π", estimate.HelmboldSlope(2*math.Pi, 6), 4.5287},
		{"lifting line AR 6, 0.105/deg", estimate.LiftingLineSlope(a0PerRad, 6), 4.5605},
		{"Helmbold AR 6, 0.105/deg", estimate.HelmboldSlope(a0PerRad, 6), 4.3949},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) { near(t, "a", tc.got, tc.want, 5e-5) })
	}
	near(t, "lifting line = 3π/2", estimate.LiftingLineSlope(2*math.Pi, 6), 3*math.Pi/2, 1e-12)
	near(t, "per degree", estimate.LiftingLineSlope(2*math.Pi, 6)*rig.Rad(1), 0.08225, 5e-6)
	near(t, "Helmbold closed form 2πAR/(2+√(AR²+4))", estimate.HelmboldSlope(2*math.Pi, 3), 2*math.Pi*3/(2+math.Sqrt(13)), 1e-12)
	if !math.IsNaN(estimate.LiftingLineSlope(2*math.Pi, 0)) {
		t.Error("AR = 0 should give NaN")
	}
}

// Ensure that En compares expanded uncertainties (docs/design.md §4).
func TestEn(t *testing.T) {
	inf := math.Inf(1)
	m := calibrate.Value{X: 0.52, U: 0.01, Dof: inf}
	d := calibrate.Value{X: 0.50, U: 0.005, Dof: inf}
	k := calibrate.K95(inf)
	want := 0.02 / math.Sqrt(k*k*0.01*0.01+k*k*0.005*0.005)
	near(t, "En", estimate.En(m, d), want, 1e-12)
	if e := estimate.En(m, d); !(e > 0 && e < 1) {
		t.Errorf("En = %g: these two agree", e)
	}
}

package estimate_test

import (
	"fmt"

	"liftyard/estimate"
	"liftyard/rig"
)

// A sail batten section on a tow rig in fresh water (a scenario of our own):
// four readings of the balance and the pitot at 6°.
func ExampleReduce() {
	fl, _ := estimate.Properties(rig.FluidFreshWater, rig.Conditions{TempK: 288.15})
	w := estimate.Window{
		NormalN:  []float64{361.0, 365.2, 359.4, 363.8},
		AxialN:   []float64{-30.1, -30.6, -29.9, -30.4},
		QPa:      []float64{2012, 2031, 2005, 2024},
		AlphaRad: []float64{rig.Rad(6), rig.Rad(6), rig.Rad(6), rig.Rad(6)},
		NormalUN: 0.8, AxialUN: 0.3, QUPa: 6, AlphaURad: rig.Rad(0.1),
		AreaM2: 0.3, AreaUM2: 0.0005, LengthM: 0.25, Fluid: fl,
	}
	p, err := estimate.Reduce(&w)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("q = %.0f Pa, V = %.3f m/s, Re = %.3g\n", p.QPa.X, p.SpeedMPerS.X, p.Re)
	fmt.Printf("C_L = %.4f ± %.4f (95 %%)\n", p.CL.X, p.CL.U95())
	fmt.Printf("C_D = %.4f ± %.4f (95 %%)\n", p.CD.X, p.CD.U95())
	// Output:
	// q = 2018 Pa, V = 2.010 m/s, Re = 4.41e+05
	// C_L = 0.6005 ± 0.0049 (95 %)
	// C_D = 0.0129 ± 0.0023 (95 %)
}

package calibrate_test

import (
	"fmt"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/rig"
)

// A load cell on a 24-bit converter: 0.0025 N per count with a −12.5 N
// offset, u = 0.15 N (an invented example).
func ExampleCalibrator_Apply() {
	r := &rig.Rig{Channels: []rig.Channel{{
		Name: "n_fore", Quantity: rig.QuantityForce, Unit: "N", ToSI: rig.Affine{Scale: 1},
		Calibration: rig.Calibration{Poly: []float64{-12.5, 0.0025}, U: 0.15},
	}}}
	c, err := calibrate.NewCalibrator(r)
	if err != nil {
		fmt.Println(err)
		return
	}
	raw := acquire.Block{Source: "carriage", DtUs: 5000, Series: []acquire.Series{
		{Channel: "n_fore", Raw: []float64{5000, 45000}},
	}}
	out := c.Apply(&raw)
	s := out.Find("n_fore")
	fmt.Printf("%.2f N, %.2f N (u = %.2f N)\n", s.Values[0], s.Values[1], s.U)
	// Output: 0.00 N, 100.00 N (u = 0.15 N)
}

package calibrate_test

import (
	"fmt"

	"liftyard/calibrate"
)

// Calibrating a 500 N load cell on a 24-bit converter with dead weights,
// loading then unloading (invented points): the fit maps counts to newtons.
func ExampleFitPoly() {
	up, down := calibrate.Up, calibrate.Down
	points := []calibrate.Point{
		{Applied: 0, Reading: 1_000_210, Direction: up},
		{Applied: 100, Reading: 1_800_530, Direction: up},
		{Applied: 200, Reading: 2_600_690, Direction: up},
		{Applied: 300, Reading: 3_400_720, Direction: up},
		{Applied: 400, Reading: 4_200_580, Direction: up},
		{Applied: 500, Reading: 5_000_300, Direction: up},
		{Applied: 400, Reading: 4_201_310, Direction: down},
		{Applied: 300, Reading: 3_401_650, Direction: down},
		{Applied: 200, Reading: 2_601_500, Direction: down},
		{Applied: 100, Reading: 1_801_080, Direction: down},
		{Applied: 0, Reading: 1_000_400, Direction: down},
	}
	f, err := calibrate.FitPoly(points, 1)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("value = %.4f N + %.7e N/count · reading\n", f.Poly[0], f.Poly[1])
	fmt.Printf("residual SD %.3f N, ν = %d\n", f.ResidualSD, f.Dof)
	fmt.Printf("non-linearity %.4f %% FS, hysteresis %.4f %% FS\n", f.NonlinearityPctFS, f.HysteresisPctFS)
	fmt.Printf("u at 3 000 000 counts with 0.05 N weights: %.3f N\n", f.ValueU(3_000_000, 0.05))
	fmt.Println("warnings:", len(f.Warnings))
	// Output:
	// value = -125.0742 N + 1.2499015e-04 N/count · reading
	// residual SD 0.064 N, ν = 9
	// non-linearity 0.0114 % FS, hysteresis 0.0232 % FS
	// u at 3 000 000 counts with 0.05 N weights: 0.054 N
	// warnings: 0
}

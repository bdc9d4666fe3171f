package rig_test

import (
	"fmt"

	"liftyard/rig"
)

func ExampleParseQuantity() {
	v, q, err := rig.ParseQuantity("12.5 mbar")
	fmt.Println(v, q, err)
	v, q, _ = rig.ParseQuantity("59 °F")
	fmt.Printf("%.2f %s\n", v, q)
	// Output:
	// 1250 pressure <nil>
	// 288.15 temperature
}

func ExampleParse_errors() {
	src := `name = "bench"
kind = "body"
fluid = "air"
[reference]
area_m2 = 0.05
[[channel]]
name = "f"
quantity = "force"
unit = "kgs"
capacity = "50 N"
calibration = { poly = [0, 1], u = 0.1 }
[lift]
normal = ["f"]
speed = "v"
angle = 0
`
	_, err := rig.Parse("bench.toml", []byte(src))
	fmt.Println(err)
	// Output:
	// bench.toml:9:1: channel "f": unknown unit "kgs" (use N, kN, kgf or lbf)
	// bench.toml:14:1: lift: speed names channel "v", which is not defined (define it under [[channel]])
}

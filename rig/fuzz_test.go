package rig_test

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"testing"

	"liftyard/rig"
)

// FuzzParse ensures that Parse never panics, that a refused file always
// comes with positioned problems, and that an accepted file survives
// Format → Parse unchanged.
func FuzzParse(f *testing.F) {
	for _, pattern := range []string{filepath.Join(rigsDir, "*.toml"), filepath.Join("testdata", "bad", "*.toml")} {
		files, _ := filepath.Glob(pattern)
		for _, p := range files {
			data, err := os.ReadFile(p)
			if err != nil {
				f.Fatal(err)
			}
			f.Add(data)
		}
	}
	f.Add([]byte(`name = "x"` + "\nkind = \"foil\"\n[[channel]]\nname = 'a'\ncalibration = { poly = [\n1,\n2], u = 1 }\n"))
	f.Add([]byte("a.b.c = 1\n[x.y]\n\"q.k\" = \"\"\"\nmulti\n\"\"\"\n[[z]]\n[[z.w]]\nk = [{a = 1}, {b = 2}]\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		r, err := rig.Parse("fuzz.toml", data)
		if err != nil {
			if r != nil {
				t.Fatal("Parse returned a Rig with an error")
			}
			errs, ok := err.(rig.Errors)
			if !ok || len(errs) == 0 {
				t.Fatalf("err = %T %v, want non-empty rig.Errors", err, err)
			}
			return
		}
		out := rig.Format(r)
		r2, err := rig.Parse("fuzz.toml", out)
		if err != nil {
			t.Fatalf("re-parse of Format output: %v\n%s", err, out)
		}
		if d := diffRig(r, r2); d != "" {
			t.Fatalf("%s\n%s", d, out)
		}
	})
}

// diffRig compares two Rigs field by field, floats to 1e-12 relative
// (unit conversions such as °C → K → °C round in the last bits).
func diffRig(a, b *rig.Rig) string {
	return diffValue("Rig", reflect.ValueOf(*a), reflect.ValueOf(*b))
}

func diffValue(path string, a, b reflect.Value) string {
	switch a.Kind() {
	case reflect.Float64:
		x, y := a.Float(), b.Float()
		if x != y && math.Abs(x-y) > 1e-12*math.Max(1, math.Max(math.Abs(x), math.Abs(y))) {
			return fmt.Sprintf("%s: %.17g != %.17g", path, x, y)
		}
	case reflect.Struct:
		for i := range a.NumField() {
			if d := diffValue(path+"."+a.Type().Field(i).Name, a.Field(i), b.Field(i)); d != "" {
				return d
			}
		}
	case reflect.Slice:
		if a.Len() != b.Len() {
			return fmt.Sprintf("%s: length %d != %d", path, a.Len(), b.Len())
		}
		for i := range a.Len() {
			if d := diffValue(fmt.Sprintf("%s[%d]", path, i), a.Index(i), b.Index(i)); d != "" {
				return d
			}
		}
	default:
		if !reflect.DeepEqual(a.Interface(), b.Interface()) {
			return fmt.Sprintf("%s: %v != %v", path, a.Interface(), b.Interface())
		}
	}
	return ""
}

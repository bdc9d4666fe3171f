package main

import (
	"go/ast"
	"go/parser"
	"go/token"
	"io/fs"
	"path/filepath"
	"strings"
	"testing"
)

// siSuffixes are the coherent SI unit suffixes a dimensional float64 field may
// end with (DEVELOPERS.md "Units in names"). Longer suffixes come first so that "M2PerS" is not
// read as "S".
var siSuffixes = []string{
	"KgPerKg", "KgPerM3", "M2PerS", "MPerS", "RadPerS", "PerRad", "PaS", "NM",
	"M3", "M2", "Pa", "Rad", "Hz", "Us", "N", "M", "K", "S", "V",
}

// dimensionless lists field names that carry no unit: coefficients and
// numbers of the trade, ratios, counts and statistics.
var dimensionless = map[string]bool{
	// coefficients and numbers of the trade
	"CL": true, "CD": true, "CM": true, "Cp": true, "CpMean": true, "CpPeak": true, "CpMin": true, "CpRMS": true, "Re": true, "Fn": true, "En": true,
	"SpinRatio": true, "SpinRatioU": true, "SpinRatioDof": true, "SpinMin": true, "SpinMax": true, "SpinScale": true, "CDSpin": true, "DesignCL": true, "DesignCp": true, "DesignU": true, "PitotCoeff": true,
	"PitotCoeffU": true, "URel": true, // the pitot coefficient's standard uncertainty; a relative one
	"CD0": true, "K": true, "Mach": true,
	"CLMax": true, "CLMinD": true, "CLAtZeroAlpha": true, "AspectRatio": true,
	"ChiSq": true,                                                                       // a fit's weighted sum of squared residuals
	"CLUp":  true, "CLDown": true, "CLDiff": true, "SlopeEn": true, "AlphaZeroEn": true, // polar hysteresis and design line tests
	"DeltaCL": true, "DeltaCD": true, "EnCD": true, "CLRef": true, "CLOther": true, "SpinRatioOther": true, "CLOffset": true, "MaxGapSpinRatio": true, // run against run (estimate/runcompare.go)
	"CpMax": true, "CpPeakU": true, "CpPeakMax": true, "CpPeakMaxU": true, "CpInt": true, // roof pressure coefficients (estimate/roof.go)
	"CpMeanMin": true, "CpMeanMax": true, // range of block means per sector (estimate/sectors.go)
	"Exponent": true, "TapGustCorrelation": true, // a power-law profile's exponent; a correlation coefficient
	// ratios and fractions
	"RelHumidity": true, "TurbulenceIntensity": true, "NoiseFrac": true, "QTolFrac": true,
	// statistics: X and U take the unit of the field that holds the Value;
	// a budget line's U and UY take the unit of its input and result.
	"X": true, "U": true, "Dof": true, "NEff": true, "Sensitivity": true, "UY": true,
	// raw readings are in the instrument's own units (counts, mV)
	"RawMin": true, "RawMax": true,
	// calibration records carry the unit in their Unit field (as the rig
	// file's channel does): values "in Unit"
	"Applied": true, "Reading": true, "ReferenceU": true, "ResidualSD": true,
	// the simulator's roof settings are coefficients and fractions of q;
	// a Gumbel fit's mode and dispersion are in the unit of the data fitted
	"InternalCp": true, "TapTurbulence": true, "ModeU": true, "ScaleInvA": true,
	// unit conversion factors
	"Scale": true, "Offset": true,
}

// Ensure that every exported float64 or calibrate.Value field in our
// packages names its SI unit, or is a known dimensionless quantity (DEVELOPERS.md "Units in names":
// one grep from a number on the screen to the code).
func TestNaming_FieldsCarrySIUnits(t *testing.T) {
	root := "../.."
	fset := token.NewFileSet()
	checked := 0
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() && (d.Name() == "testdata" || strings.HasPrefix(d.Name(), ".")) && path != root {
			return filepath.SkipDir
		}
		if d.IsDir() || !strings.HasSuffix(path, ".go") || strings.HasSuffix(path, "_test.go") {
			return nil
		}
		f, err := parser.ParseFile(fset, path, nil, parser.SkipObjectResolution)
		if err != nil {
			return err
		}
		ast.Inspect(f, func(n ast.Node) bool {
			ts, ok := n.(*ast.TypeSpec)
			if !ok || !ts.Name.IsExported() {
				return true
			}
			st, ok := ts.Type.(*ast.StructType)
			if !ok {
				return true
			}
			for _, field := range st.Fields.List {
				if !isQuantityType(field.Type) {
					continue
				}
				for _, name := range field.Names {
					if !name.IsExported() {
						continue
					}
					checked++
					if !hasUnit(name.Name) {
						t.Errorf("%s: %s.%s: a float64 quantity needs an SI unit suffix (%v) or an entry in the dimensionless list",
							fset.Position(name.Pos()), ts.Name.Name, name.Name, siSuffixes)
					}
				}
			}
			return true
		})
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if checked < 30 {
		t.Fatalf("only %d fields checked: the walk found too little", checked)
	}
}

func isQuantityType(e ast.Expr) bool {
	switch x := e.(type) {
	case *ast.Ident:
		return x.Name == "float64" || x.Name == "Value"
	case *ast.SelectorExpr:
		return x.Sel.Name == "Value"
	}
	return false
}

// dimensionlessSuffixes end names of dimensionless quantities: degrees of
// freedom, fractions, coefficients. "SI" ends a value in the SI unit of its
// channel's quantity (N for a force channel, Pa for a pressure channel).
var dimensionlessSuffixes = []string{"Dof", "Frac", "Coeff", "SI", "PctFS",
	"URel", // a relative standard uncertainty (issue 10: span)
}

func hasUnit(name string) bool {
	if dimensionless[name] {
		return true
	}
	for _, s := range dimensionlessSuffixes {
		if strings.HasSuffix(name, s) && len(name) > len(s) {
			return true
		}
	}
	for _, s := range siSuffixes {
		if strings.HasSuffix(name, s) && len(name) > len(s) {
			return true
		}
	}
	return false
}

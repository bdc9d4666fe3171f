package calibrate_test

import (
	"bytes"
	"errors"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"liftyard/calibrate"
	"liftyard/rig"
)

// Ensure that ReadPoints accepts the points format of docs/design.md §3.1 with its
// comments, blank lines, column orders and number syntaxes, and names the
// exact line and column of every problem.
func TestReadPoints(t *testing.T) {
	tests := []struct {
		name    string
		in      string
		want    []calibrate.Point
		wantErr string // exact message; empty when the file is good
		line    int
		column  int
	}{
		{
			name: "two columns",
			in:   "applied,reading\n0,12\n50,1012.5\n",
			want: []calibrate.Point{{Applied: 0, Reading: 12}, {Applied: 50, Reading: 1012.5}},
		},
		{
			name: "byte-order mark of a spreadsheet export", // issue 16
			in:   "\ufeffapplied,reading\n0,12\n50,1012.5\n",
			want: []calibrate.Point{{Applied: 0, Reading: 12}, {Applied: 50, Reading: 1012.5}},
		},
		{
			name: "directions any case, blank allowed, comments and blank lines",
			in:   "# fore cell, dead weights\n\napplied,reading,direction\n0,10,UP\n  # indented comment\n50,510,Up\n\n50,512,down\n0,11,\n",
			want: []calibrate.Point{
				{Applied: 0, Reading: 10, Direction: calibrate.Up},
				{Applied: 50, Reading: 510, Direction: calibrate.Up},
				{Applied: 50, Reading: 512, Direction: calibrate.Down},
				{Applied: 0, Reading: 11},
			},
		},
		{
			name: "columns in another order, spaces and Go float syntax",
			in:   "Reading , Applied\n 1e6, 0x1p4\n-2.5E-3,1_0\n",
			want: []calibrate.Point{{Applied: 16, Reading: 1e6}, {Applied: 10, Reading: -2.5e-3}},
		},
		{name: "comma decimal refused", in: "reading,applied\n1e6,0x1p4\n\"2,5\",+7\n",
			wantErr: `line 3: reading "2,5" is not a number`, line: 3, column: 1},
		{
			name: "quoted fields as a spreadsheet writes them",
			in:   "\"applied\",\"reading\"\n\"10\",\"2000\"\n",
			want: []calibrate.Point{{Applied: 10, Reading: 2000}},
		},
		{name: "reading not a number", in: "applied,reading\n0,1\n\n# c\n5,2\n10,12x\n",
			wantErr: `line 6: reading "12x" is not a number`, line: 6, column: 4},
		{name: "NaN refused", in: "applied,reading\nNaN,1\n",
			wantErr: `line 2: applied "NaN" is not a finite number`, line: 2, column: 1},
		{name: "infinity refused", in: "applied,reading\n1,-Inf\n",
			wantErr: `line 2: reading "-Inf" is not a finite number`, line: 2, column: 3},
		{name: "out of range", in: "applied,reading\n1,1e400\n",
			wantErr: `line 2: reading "1e400" is out of the float64 range`, line: 2, column: 3},
		{name: "empty number", in: "applied,reading\n,4\n",
			wantErr: `line 2: applied "" is empty: every point needs a number here`, line: 2, column: 1},
		{name: "bad direction", in: "applied,reading,direction\n1,2,sideways\n",
			wantErr: `line 2: direction "sideways" is not up, down or blank (up while loading, down while unloading)`, line: 2, column: 5},
		{name: "too many fields", in: "applied,reading\n1,2,3\n",
			wantErr: `line 2: 3 fields, the header has 2`, line: 2},
		{name: "too few fields", in: "applied,reading,direction\n1,2,up\n3,4\n",
			wantErr: `line 3: 2 fields, the header has 3`, line: 3},
		{name: "unknown column", in: "# x\napplied,counts\n",
			wantErr: `line 2: unknown column "counts" (the header is applied,reading[,direction])`, line: 2, column: 9},
		{name: "column twice", in: "applied,reading,Applied\n",
			wantErr: `line 1: column "applied" appears twice`, line: 1, column: 17},
		{name: "no reading column", in: "applied\n1\n",
			wantErr: `line 1: header has no "reading" column (the first line that is not blank or a # comment must be applied,reading[,direction])`, line: 1},
		{name: "header is data", in: "0,12\n",
			wantErr: `line 1: unknown column "0" (the header is applied,reading[,direction])`, line: 1, column: 1},
		{name: "empty file", in: "# nothing\n\n",
			wantErr: `no header: the file is empty (write applied,reading[,direction] and one line per point)`},
		{name: "header only", in: "applied,reading\n",
			wantErr: `no points after the header`},
		{name: "bare quote", in: "applied,reading\n1,2\"3\n",
			wantErr: `line 2: bare " in non-quoted-field`, line: 2, column: 4},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := calibrate.ReadPoints(strings.NewReader(tt.in))
			if tt.wantErr == "" {
				if err != nil {
					t.Fatalf("ReadPoints: %v", err)
				}
				if !reflect.DeepEqual(got, tt.want) {
					t.Fatalf("points\n got %+v\nwant %+v", got, tt.want)
				}
				return
			}
			if err == nil {
				t.Fatalf("ReadPoints accepted the file: %+v", got)
			}
			if err.Error() != tt.wantErr {
				t.Errorf("error\n got %s\nwant %s", err, tt.wantErr)
			}
			if !errors.Is(err, calibrate.ErrPointsFile) {
				t.Errorf("error does not wrap ErrPointsFile: %v", err)
			}
			var pe *rig.Error
			if !errors.As(err, &pe) {
				t.Fatalf("error is %T, want *rig.Error", err)
			}
			if pe.Line != tt.line || pe.Col != tt.column {
				t.Errorf("position %d:%d, want %d:%d", pe.Line, pe.Col, tt.line, tt.column)
			}
		})
	}
}

// Ensure that a points error given its file name prints as file:line:
// message, the form the CLI shows.
func TestReadPoints_ErrorFile(t *testing.T) {
	_, err := calibrate.ReadPoints(strings.NewReader("applied,reading\n1,2\n3,4\n5,6\n7,8\n9,10\n11,12x\n"))
	var pe *rig.Error
	if !errors.As(err, &pe) {
		t.Fatalf("error %v is not a *rig.Error", err)
	}
	pe.File = "points.csv"
	if got, want := pe.Error(), `points.csv:7: reading "12x" is not a number`; got != want {
		t.Errorf("got %q, want %q", got, want)
	}
}

// Ensure that WritePoints output reads back to the same points, and that
// the shortest 'g' form keeps every bit of a 24-bit ADC reading.
func TestWritePoints_RoundTrip(t *testing.T) {
	pts := []calibrate.Point{
		{Applied: 0, Reading: -8388608, Direction: calibrate.Up},
		{Applied: 98.0665, Reading: 8388607.25, Direction: calibrate.Up},
		{Applied: 0.1 + 0.2, Reading: math.Nextafter(1e6, 2e6), Direction: calibrate.Down},
		{Applied: -5e-300, Reading: 1},
	}
	var buf bytes.Buffer
	if err := calibrate.WritePoints(&buf, pts); err != nil {
		t.Fatal(err)
	}
	got, err := calibrate.ReadPoints(&buf)
	if err != nil {
		t.Fatalf("read back: %v", err)
	}
	if !reflect.DeepEqual(got, pts) {
		t.Errorf("round trip\n got %+v\nwant %+v", got, pts)
	}
	if err := calibrate.WritePoints(&buf, []calibrate.Point{{Applied: math.NaN()}}); err == nil {
		t.Error("WritePoints wrote a NaN point")
	}
}

// Ensure that the example points files in testdata/calibration read
// without error (they are what docs/calibration.md shows).
func TestReadPoints_Examples(t *testing.T) {
	files, err := filepath.Glob("../testdata/calibration/*.csv")
	if err != nil {
		t.Fatal(err)
	}
	if len(files) == 0 {
		t.Fatal("no example points files in testdata/calibration")
	}
	for _, f := range files {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		pts, err := calibrate.ReadPoints(bytes.NewReader(data))
		if err != nil {
			t.Errorf("%s: %v", f, err)
			continue
		}
		if len(pts) < 3 {
			t.Errorf("%s: only %d points", f, len(pts))
		}
	}
}

// FuzzReadPoints ensures that no input makes ReadPoints panic, and that
// every accepted file round-trips: WritePoints then ReadPoints gives the
// same points (csv's FuzzRoundtrip pattern).
func FuzzReadPoints(f *testing.F) {
	f.Add("applied,reading\n0,12\n50,1012.5\n")
	f.Add("# c\n\nreading,applied,direction\n1e6,0x1p4,UP\n2,3,down\n4,5,\n")
	f.Add("\"applied\",\"reading\"\n\"10\",\"2000\"\n")
	f.Add("applied,reading\n10,12x\n")
	f.Add("applied,reading,direction\n1,2,sideways\n")
	f.Add("applied,reading\n1,2\"3\n")
	f.Fuzz(func(t *testing.T, in string) {
		pts, err := calibrate.ReadPoints(strings.NewReader(in))
		if err != nil {
			var pe *rig.Error
			if !errors.As(err, &pe) {
				t.Fatalf("error %v is %T, not a *rig.Error", err, err)
			}
			return
		}
		for _, p := range pts {
			if math.IsNaN(p.Applied) || math.IsInf(p.Applied, 0) || math.IsNaN(p.Reading) || math.IsInf(p.Reading, 0) {
				t.Fatalf("accepted a non-finite point %+v", p)
			}
		}
		var buf bytes.Buffer
		if err := calibrate.WritePoints(&buf, pts); err != nil {
			t.Fatalf("write accepted points: %v", err)
		}
		again, err := calibrate.ReadPoints(&buf)
		if err != nil {
			t.Fatalf("read back %q: %v", buf.String(), err)
		}
		if !reflect.DeepEqual(again, pts) {
			t.Fatalf("round trip\n got %+v\nwant %+v", again, pts)
		}
	})
}

package acquire_test

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"
	"time"

	"liftyard/acquire"
)

// readBoth reads in through the fast path and through encoding/csv.
func readBoth(t testing.TB, in string, blockN int) (fast, straight []acquire.Block, fastErr, straightErr error) {
	t.Helper()
	fastErr = acquire.ReadRawCSV(strings.NewReader(in), "q.csv", blockN, func(b acquire.Block) error {
		fast = append(fast, b)
		return nil
	})
	straightErr = acquire.ReadRawCSVStraight(strings.NewReader(in), "q.csv", blockN, time.Time{}, func(b acquire.Block) error {
		straight = append(straight, b)
		return nil
	})
	return fast, straight, fastErr, straightErr
}

// sameBlocks says how two block lists differ, bit for bit ("" when they
// do not).
func sameBlocks(a, b []acquire.Block) string {
	if len(a) != len(b) {
		return fmt.Sprintf("%d blocks against %d", len(a), len(b))
	}
	for i := range a {
		x, y := a[i], b[i]
		if x.Source != y.Source || x.Seq != y.Seq || x.T0Us != y.T0Us || x.DtUs != y.DtUs || !x.Received.Equal(y.Received) || len(x.Series) != len(y.Series) {
			return fmt.Sprintf("block %d: %+v against %+v", i, x, y)
		}
		for k := range x.Series {
			if x.Series[k].Channel != y.Series[k].Channel || len(x.Series[k].Raw) != len(y.Series[k].Raw) {
				return fmt.Sprintf("block %d series %d: %q/%d against %q/%d", i, k, x.Series[k].Channel, len(x.Series[k].Raw), y.Series[k].Channel, len(y.Series[k].Raw))
			}
			for j, v := range x.Series[k].Raw {
				if w := y.Series[k].Raw[j]; math.Float64bits(v) != math.Float64bits(w) {
					return fmt.Sprintf("block %d series %q sample %d: %v (%x) against %v (%x)", i, x.Series[k].Channel, j, v, math.Float64bits(v), w, math.Float64bits(w))
				}
			}
		}
	}
	return ""
}

func errString(err error) string {
	if err == nil {
		return "<nil>"
	}
	return err.Error()
}

// Ensure that the fast splitter reads what encoding/csv reads, bit for bit,
// with the same errors at the same lines, on records with quirks: a BOM,
// CRLF, blank lines, quotes (where the fast path hands over to
// encoding/csv), a bad line, gaps, odd numbers, a line longer than the read
// buffer.
func TestReadRawCSV_FastEqualsStraight(t *testing.T) {
	long := "t_s,a\n0,1\n0.001," + strings.Repeat(" ", 300<<10) + "2\n0.002,3\n"
	for _, c := range []struct{ name, in string }{
		{"plain", "t_s,a,b\n0.000,1,2\n0.001,3,4\n0.002,5,6\n"},
		{"BOM and CRLF", "\ufefft_s,a\r\n0.5,1\r\n0.75,2\r\n1.0,3\r\n"},
		{"blank lines", "t_s,a\n\n0,1\n\r\n\n0.001,2\n\n"},
		{"trailing CR at EOF", "t_s,a\n0,1\n0.001,2\r"},
		{"no final newline", "t_s,a\n0,1\n0.001,2"},
		{"start line", "# start 2026-03-14T09:00:00Z\nt_s,a\n0,1\n0.001,2\n0.002,3\n"},
		{"gaps and rates", "t_s,a\n0.000,1\n0.001,1\n0.002,1\n0.010,1\n0.011,1\n0.013,1\n0.015,1\n"},
		{"quoted cells", "t_s,a,b\n0,1,2\n0.001,\"3\",\"4\"\n0.002,5,6\n"},
		{"quoted header", "\"t_s\",\"a\"\n0,1\n0.001,2\n"},
		{"quote with newline", "t_s,a\n0,1\n0.001,\"2\n\"\n0.002,3\n"},
		{"bare quote", "t_s,a\n0,1\n0.001,2\"\n"},
		{"field count", "t_s,a,b\n0,1,2\n0.001,2\n"},
		{"field count after quotes", "t_s,a,b\n0,\"1\",2\n0.001,2\n"},
		{"bad number", "t_s,a\n0,1\n0.001,1.2.3\n"},
		{"bad time", "t_s,a\n0,1\nx,2\n"},
		{"time goes back", "t_s,a\n0.002,1\n0.001,1\n"},
		{"spaces", "t_s, a ,b\n 0 , 1 ,  \n0.001,\t2,3\n"},
		{"odd numbers", "t_s,a,b,c,d,e,f,g\n0,+1,-0,.5,5.,1e5,0x1p-2,NaN\n0.001,1E+05,-2.5e-3,123456789012345678901234,1e-400,0.1,3.345049e+06,-3959\n"},
		{"overflow", "t_s,a\n0,1\n0.001,1e400\n"},
		{"underscore", "t_s,a\n0,1\n0.001,1_000\n"},
		{"long line", long},
		{"empty", ""},
		{"header only", "t_s,a\n"},
		{"one row", "t_s,a\n0,1\n"},
	} {
		t.Run(c.name, func(t *testing.T) {
			fast, straight, fe, se := readBoth(t, c.in, 3)
			if errString(fe) != errString(se) {
				t.Fatalf("errors differ:\nfast     %v\nstraight %v", fe, se)
			}
			if d := sameBlocks(fast, straight); d != "" {
				t.Fatal(d)
			}
		})
	}
}

// FuzzReadRawCSV_FastEqualsStraight checks on any input that the fast path
// gives the blocks and the error encoding/csv gives.
func FuzzReadRawCSV_FastEqualsStraight(f *testing.F) {
	for _, s := range []string{
		"t_s,a,b\n0.000,1,2\n0.001,3,4\n0.002,5,6\n",
		"\ufefft_s,a\r\n0.5,1\r\n\r\n0.75,2\r\n",
		"t_s,a\n0,\"1\n\",\n",
		"# start 2026-03-14T09:00:00Z\nt_s,a\n0,1e3\n0.001,.5\n",
		"t_s,a,b\n0,1\n",
	} {
		f.Add([]byte(s), 3)
	}
	f.Fuzz(func(t *testing.T, data []byte, blockN int) {
		blockN = blockN%20 + 1
		if blockN < 1 {
			blockN = -blockN + 1
		}
		fast, straight, fe, se := readBoth(t, string(data), blockN)
		if errString(fe) != errString(se) {
			t.Fatalf("errors differ:\nfast     %v\nstraight %v", fe, se)
		}
		if d := sameBlocks(fast, straight); d != "" {
			t.Fatal(d)
		}
	})
}

// Ensure that the raw CSV number parser gives strconv.ParseFloat's value bit
// for bit, and its verdict, on the forms loggers write and on random ones.
func TestParseFloatBytes_MatchesStrconv(t *testing.T) {
	cases := []string{"0", "-0", "+0", "1", "-3959", "812.1", "3.345049e+06", "1e22", "1e23", "9007199254740992",
		"9007199254740993", "0.1", "0.30000000000000004", "1.7976931348623157e308", "4.9e-324", "1e-22", "1e-23",
		"123456789012345678", "1234567890123456789", "12345678901234567890", ".5", "5.", ".", "-", "e5", "1e", "1e+",
		"0x10", "inf", "NaN", "1_0", "00012.5000", "1.000000000000000000001", "0e99999"}
	rng := rand.New(rand.NewPCG(1, 2))
	for range 20000 {
		var s string
		switch rng.IntN(4) {
		case 0: // whole counts of a 24-bit ADC
			s = strconv.Itoa(rng.IntN(1<<24) - 1<<23)
		case 1: // fixed decimals
			s = strconv.FormatFloat(rng.NormFloat64()*1000, 'f', rng.IntN(8), 64)
		case 2: // shortest round trip
			s = strconv.FormatFloat(rng.NormFloat64()*math.Pow(10, float64(rng.IntN(40)-20)), 'g', -1, 64)
		default: // exponent form of a fixed precision
			s = strconv.FormatFloat(rng.Float64()*1e7, 'e', rng.IntN(17), 64)
		}
		cases = append(cases, s)
	}
	for _, s := range cases {
		want, werr := strconv.ParseFloat(s, 64)
		got, gerr := acquire.ParseFloatBytes([]byte(s))
		if (werr == nil) != (gerr == nil) || math.Float64bits(got) != math.Float64bits(want) && !(math.IsNaN(got) && math.IsNaN(want)) {
			t.Errorf("%q: %v (%v), strconv %v (%v)", s, got, gerr, want, werr)
		}
	}
}

// FuzzParseFloatBytes compares the raw CSV number parser with strconv.
func FuzzParseFloatBytes(f *testing.F) {
	for _, s := range []string{"1", "-3959", "3.345049e+06", "0.1", ".5e-3", "9007199254740993", "1e23"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		want, werr := strconv.ParseFloat(s, 64)
		got, gerr := acquire.ParseFloatBytes([]byte(s))
		if (werr == nil) != (gerr == nil) || math.Float64bits(got) != math.Float64bits(want) && !(math.IsNaN(got) && math.IsNaN(want)) {
			t.Errorf("%q: %v (%v), strconv %v (%v)", s, got, gerr, want, werr)
		}
	})
}

// Ensure that the fast path allocates per block, never per row: 10 000 rows
// of 6 channels in blocks of 100 take no more than the blocks themselves
// (the series of each block) and a fixed start-up.
func TestReadRawCSV_AllocatesPerBlock(t *testing.T) {
	var sb strings.Builder
	sb.WriteString("t_s,n_fore,n_aft,a_main,pitot,alpha,t_water\n")
	for i := range 10000 {
		fmt.Fprintf(&sb, "%d.%06d,%d,%d,%d,3.345049e+06,2002,15.25\n", 1733061000+i/1000, (i%1000)*1000, 4000+i%17, 600+i%13, 4700+i%11)
	}
	in := []byte(sb.String())
	allocs := testing.AllocsPerRun(3, func() {
		if err := acquire.ReadRawCSV(bytes.NewReader(in), "bench", 100, func(acquire.Block) error { return nil }); err != nil {
			t.Fatal(err)
		}
	})
	const blocks, perBlock, startUp = 100, 1 + 1 + 6, 40 // block, series, raw slices; reader, header
	if allocs > blocks*perBlock+startUp {
		t.Errorf("%.0f allocations for 10 000 rows in %d blocks, want ≤ %d", allocs, blocks, blocks*perBlock+startUp)
	}
	info, err := acquire.CheckRawCSV(bytes.NewReader(in), "bench", time.Time{})
	if err != nil || info.Rows != 10000 || len(info.Channels) != 6 || info.FirstUs != 1733061000_000000 || info.Relative {
		t.Errorf("CheckRawCSV: %+v, %v", info, err)
	}
	allocs = testing.AllocsPerRun(3, func() {
		if _, err := acquire.CheckRawCSV(bytes.NewReader(in), "bench", time.Time{}); err != nil {
			t.Fatal(err)
		}
	})
	if allocs > startUp+perBlock {
		t.Errorf("CheckRawCSV: %.0f allocations, want ≤ %d (one block, reused)", allocs, startUp+perBlock)
	}
}

// Ensure that CheckRawCSV refuses what ReadRawCSV refuses, with the same
// error, and counts the rows.
func TestCheckRawCSV(t *testing.T) {
	for _, in := range []string{"t_s,a\n0,1\n1,x\n", "t_s,a\n0,1\n", "", "t_s,a\n0,1\n0.5,2\n", "t_s,a\n5,1\n6,\"2\"\n7,3\n"} {
		_, rerr := readAll(t, in, 0)
		info, cerr := acquire.CheckRawCSV(strings.NewReader(in), "raw.csv", time.Time{})
		if errString(rerr) != errString(cerr) {
			t.Errorf("%q: CheckRawCSV %v, ReadRawCSV %v", in, cerr, rerr)
		}
		if rerr == nil && (info.Rows != strings.Count(in, "\n")-1 || !info.Relative) {
			t.Errorf("%q: %+v", in, info)
		}
	}
}

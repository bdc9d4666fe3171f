package acquire_test

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"testing"

	"liftyard/acquire"
	"liftyard/rig"
)

func readAll(t testing.TB, in string, blockN int) ([]acquire.Block, error) {
	t.Helper()
	var out []acquire.Block
	err := acquire.ReadRawCSV(strings.NewReader(in), "raw.csv", blockN, func(b acquire.Block) error {
		out = append(out, b)
		return nil
	})
	return out, err
}

// Ensure that rows become blocks of one spacing: full blocks split at
// blockSamples, a gap or a new rate starts a new block, blank cells are NaN
// and the time is read to the microsecond exactly.
func TestReadRawCSV_Blocks(t *testing.T) {
	type blk struct {
		t0, dt int64
		n      int
	}
	for _, c := range []struct {
		name   string
		in     string
		blockN int
		want   []blk
	}{
		{"one block", "t_s,a,b\n0.000,1,2\n0.001,3,4\n0.002,5,6\n", 10, []blk{{0, 1000, 3}}},
		{"split at block size", "t_s,a\n1.000,1\n1.001,1\n1.002,1\n1.003,1\n1.004,1\n", 2, []blk{{1_000_000, 1000, 2}, {1_002_000, 1000, 2}, {1_004_000, 1000, 1}}},
		{"gap", "t_s,a\n0.000,1\n0.001,1\n0.002,1\n0.010,1\n0.011,1\n", 10, []blk{{0, 1000, 3}, {10_000, 1000, 2}}},
		{"new rate", "t_s,a\n0.000,1\n0.001,1\n0.002,1\n0.004,1\n0.006,1\n0.008,1\n", 10, []blk{{0, 1000, 3}, {4000, 2000, 3}}},
		{"exact microseconds", "t_s,a\n1733061000.000001,1\n1733061000.000002,1\n", 10, []blk{{1_733_061_000_000_001, 1, 2}}},
		{"CRLF and BOM", "\ufefft_s,a\r\n0.5,1\r\n0.75,2\r\n", 10, []blk{{500_000, 250_000, 2}}},
	} {
		t.Run(c.name, func(t *testing.T) {
			got, err := readAll(t, c.in, c.blockN)
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != len(c.want) {
				t.Fatalf("%d blocks, want %d: %+v", len(got), len(c.want), got)
			}
			for i, w := range c.want {
				b := got[i]
				if b.T0Us != w.t0 || b.DtUs != w.dt || b.Len() != w.n || b.Seq != uint64(i) || b.Source != "raw.csv" {
					t.Errorf("block %d: t0 %d dt %d n %d seq %d, want %+v", i, b.T0Us, b.DtUs, b.Len(), b.Seq, w)
				}
			}
		})
	}
	got, err := readAll(t, "t_s,a,b\n0.000,1.5,\n0.001,,-2e3\n", 10)
	if err != nil {
		t.Fatal(err)
	}
	a, b := got[0].Raw("a"), got[0].Raw("b")
	if a[0] != 1.5 || !math.IsNaN(a[1]) || !math.IsNaN(b[0]) || b[1] != -2000 {
		t.Errorf("a %v b %v, want [1.5 NaN] [NaN -2000]", a, b)
	}
}

// Ensure that every bad file is refused with its line and column.
func TestReadRawCSV_Errors(t *testing.T) {
	for _, c := range []struct{ name, in, want string }{
		{"empty", "", "raw.csv: empty file"},
		{"no t_s", "time,a\n0,1\n", `raw.csv:1: header "time,a": want t_s followed by channel names`},
		{"no channels", "t_s\n0\n", `raw.csv:1: header "t_s"`},
		{"twice", "t_s,a,a\n0,1,2\n", `raw.csv:1: column "a": channel named twice`},
		{"blank name", "t_s,a,\n0,1,2\n", `raw.csv:1: header column 3 has no channel name`},
		{"not a number", "t_s,n_fore,pitot\n0.0,1,2\n0.1,1,2\n0.2,3,1.2.3\n", `raw.csv:4: column "pitot": "1.2.3" is not a number`},
		{"infinite", "t_s,a\n0,1\n1,Inf\n", `raw.csv:3: column "a": "Inf" is not a number`},
		{"bad time", "t_s,a\n0,1\nx,1\n", `raw.csv:3: column "t_s": "x" is not a time in seconds`},
		{"time goes back", "t_s,a\n0.002,1\n0.001,1\n", `raw.csv:3: column "t_s": 0.001 s is not after 0.002000 s on line 2`},
		{"field count", "t_s,a,b\n0,1,2\n1,2\n", "raw.csv:3: wrong number of fields"},
		{"one row", "t_s,a\n0,1\n", "raw.csv: one sample time only"},
		{"no rows", "t_s,a\n", "raw.csv: no rows after the header"},
		{"bare quote", "t_s,a\n0,\"1\n", "raw.csv:2:"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := readAll(t, c.in, 10)
			var re *rig.Error
			if err == nil || !strings.HasPrefix(err.Error(), c.want) || !errors.As(err, &re) || !errors.Is(err, acquire.ErrRawCSV) {
				t.Errorf("err = %v, want prefix %q as *rig.Error", err, c.want)
			}
		})
	}
}

// Ensure that an error from emit stops the read and comes back unchanged.
func TestReadRawCSV_EmitError(t *testing.T) {
	stop := errors.New("stop")
	n := 0
	err := acquire.ReadRawCSV(strings.NewReader("t_s,a\n0,1\n1,1\n2,1\n3,1\n"), "r", 2, func(acquire.Block) error { n++; return stop })
	if err != stop || n != 1 {
		t.Errorf("err %v after %d blocks, want stop after 1", err, n)
	}
}

// writeRawCSV writes blocks back in the raw CSV format (the writer side of
// the fuzz round trip).
func writeRawCSV(blocks []acquire.Block) string {
	var b bytes.Buffer
	if len(blocks) == 0 {
		return ""
	}
	b.WriteString("t_s")
	for _, s := range blocks[0].Series {
		b.WriteString("," + s.Channel)
	}
	b.WriteString("\n")
	for _, blk := range blocks {
		for i := range blk.Len() {
			t := blk.T0Us + int64(i)*blk.DtUs
			sign := ""
			if t < 0 {
				sign, t = "-", -t
			}
			fmt.Fprintf(&b, "%s%d.%06d", sign, t/1e6, t%1e6)
			for _, s := range blk.Series {
				b.WriteString(",")
				if v := s.Raw[i]; !math.IsNaN(v) {
					b.WriteString(strconv.FormatFloat(v, 'g', -1, 64))
				}
			}
			b.WriteString("\n")
		}
	}
	return b.String()
}

// FuzzReadRawCSV checks that the import never panics, refuses with a
// positioned *rig.Error or gives well-formed blocks (equal-length series,
// positive spacing, increasing time), and that writing those blocks back
// and reading them again gives the same samples (parse → write → parse).
func FuzzReadRawCSV(f *testing.F) {
	for _, s := range []string{
		"t_s,a,b\n0.000,1,2\n0.001,3,4\n0.002,5,6\n",
		"t_s,n_fore,pitot\n1733061000.000000,812.1,201.4\n1733061000.005000,,201.9\n1733061000.010000,813,\n",
		"t_s,a\n0.000,1\n0.001,1\n0.002,1\n0.010,1\n0.011,1\n",
		"t_s,a\n-1.5,1\n-1.25,NaN\n1e-3,2\n",
		"t_s,a\n0,\"1\n",
		"t_s\n",
	} {
		f.Add([]byte(s), 3)
	}
	f.Fuzz(func(t *testing.T, data []byte, blockN int) {
		blockN = blockN%50 + 1
		if blockN < 1 {
			blockN = -blockN + 1
		}
		var blocks []acquire.Block
		err := acquire.ReadRawCSV(bytes.NewReader(data), "f.csv", blockN, func(b acquire.Block) error {
			blocks = append(blocks, b)
			return nil
		})
		if err != nil {
			var re *rig.Error
			if !errors.As(err, &re) {
				t.Fatalf("error %v is not a *rig.Error", err)
			}
			return
		}
		last := int64(math.MinInt64)
		var times []int64
		var vals []float64
		for _, b := range blocks {
			if b.DtUs <= 0 || b.Len() == 0 || b.Len() > blockN {
				t.Fatalf("block dt %d len %d (max %d)", b.DtUs, b.Len(), blockN)
			}
			for i := range b.Len() {
				tt := b.T0Us + int64(i)*b.DtUs
				if tt <= last {
					t.Fatalf("time %d not after %d", tt, last)
				}
				last = tt
				times = append(times, tt)
				for _, s := range b.Series {
					if len(s.Raw) != b.Len() {
						t.Fatalf("series %q has %d samples of %d", s.Channel, len(s.Raw), b.Len())
					}
					vals = append(vals, s.Raw[i])
				}
			}
		}
		again, err := readAll(t, writeRawCSV(blocks), blockN)
		if err != nil {
			t.Fatalf("re-read of written blocks: %v", err)
		}
		k, j := 0, 0
		for _, b := range again {
			for i := range b.Len() {
				if tt := b.T0Us + int64(i)*b.DtUs; j >= len(times) || tt != times[j] {
					t.Fatalf("sample %d at %d after round trip", j, tt)
				}
				j++
				for _, s := range b.Series {
					v := s.Raw[i]
					if !(v == vals[k] || math.IsNaN(v) && math.IsNaN(vals[k])) {
						t.Fatalf("value %v became %v", vals[k], v)
					}
					k++
				}
			}
		}
		if j != len(times) {
			t.Fatalf("%d samples after round trip, want %d", j, len(times))
		}
	})
}

// BenchmarkReadRawCSV measures the import of a raw record: 6 channels,
// 10 000 sample times at 1 kHz, blocks of 100.
func BenchmarkReadRawCSV(b *testing.B) {
	var sb strings.Builder
	sb.WriteString("t_s,n_fore,n_aft,a_main,pitot,alpha,t_water\n")
	for i := range 10000 {
		fmt.Fprintf(&sb, "%d.%06d,%d,%d,%d,3345049,2002,1500\n", 1733061000+i/1000, (i%1000)*1000, 4000+i%17, 600+i%13, 4700+i%11)
	}
	in := sb.String()
	b.ReportAllocs()
	b.SetBytes(int64(len(in)))
	for b.Loop() {
		n := 0
		if err := acquire.ReadRawCSV(strings.NewReader(in), "bench", 100, func(blk acquire.Block) error { n += blk.Len(); return nil }); err != nil || n != 10000 {
			b.Fatalf("%v, %d samples", err, n)
		}
	}
	b.ReportMetric(10000*float64(b.N)/b.Elapsed().Seconds(), "samples/s")
}

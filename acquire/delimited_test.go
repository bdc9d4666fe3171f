package acquire_test

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
)

var delimitedTests = []struct {
	name   string
	delim  string
	cols   []string
	line   string
	want   acquire.DelimitedRecord
	reason acquire.Reason
	err    error
	field  int
}{
	{name: "comma, no time", delim: ",", cols: []string{"a", "b"}, line: "1.5,-2\n",
		want: acquire.DelimitedRecord{Values: []float64{1.5, -2}}},
	{name: "default delimiter", cols: []string{"a", "b"}, line: "1,2", want: acquire.DelimitedRecord{Values: []float64{1, 2}}},
	{name: "semicolon, spaces trimmed, skip, t_ms", delim: ";", cols: []string{"t_ms", "n_fore", "_", "pitot"},
		line: "  1250.5 ; 812.4 ; junk ; 201.9 \r\n",
		want: acquire.DelimitedRecord{TUs: 1250500, HasTime: true, Values: []float64{812.4, 201.9}}},
	{name: "tab, t_s", delim: "\t", cols: []string{"a", "t_s"}, line: "7\t2.000001\n",
		want: acquire.DelimitedRecord{TUs: 2000001, HasTime: true, Values: []float64{7}}},
	{name: "tab with empty field", delim: "\t", cols: []string{"a", "b"}, line: "7\t\n",
		reason: acquire.ReasonParse, err: acquire.ErrFrameSyntax, field: 2},
	{name: "t_us", delim: ",", cols: []string{"t_us", "a"}, line: "1733061000000000,3",
		want: acquire.DelimitedRecord{TUs: 1733061000000000, HasTime: true, Values: []float64{3}}},
	{name: "space-aligned columns", delim: " ", cols: []string{"a", "b", "c"}, line: "   1    22  333  \n",
		want: acquire.DelimitedRecord{Values: []float64{1, 22, 333}}},
	{name: "multi-byte delimiter", delim: "||", cols: []string{"a", "b"}, line: "1||2",
		want: acquire.DelimitedRecord{Values: []float64{1, 2}}},

	{name: "header line", delim: ",", cols: []string{"t_ms", "a"}, line: "time_ms,lift\n",
		reason: acquire.ReasonParse, err: acquire.ErrFrameSyntax, field: 1},
	{name: "empty line", delim: ",", cols: []string{"a"}, line: "\r\n", reason: acquire.ReasonParse, err: acquire.ErrEmptyLine},
	{name: "blank line", delim: "\t", cols: []string{"a"}, line: " \t \n", reason: acquire.ReasonParse, err: acquire.ErrEmptyLine},
	{name: "too few fields", delim: ",", cols: []string{"a", "b", "c"}, line: "1,2",
		reason: acquire.ReasonFieldCount, err: acquire.ErrFieldCount},
	{name: "too many fields", delim: ",", cols: []string{"a"}, line: "1,2",
		reason: acquire.ReasonFieldCount, err: acquire.ErrFieldCount},
	{name: "not a number", delim: ",", cols: []string{"a", "b"}, line: "1,4.2V",
		reason: acquire.ReasonParse, err: acquire.ErrFrameSyntax, field: 2},
	{name: "skipped field may be anything", delim: ",", cols: []string{"_", "b"}, line: "OVL,4",
		want: acquire.DelimitedRecord{Values: []float64{4}}},
	{name: "NaN text", delim: ",", cols: []string{"a", "b"}, line: "1,nan",
		reason: acquire.ReasonNaN, err: acquire.ErrFrameNaN, field: 2},
	{name: "NaN time", delim: ",", cols: []string{"t_s", "b"}, line: "NaN,1",
		reason: acquire.ReasonNaN, err: acquire.ErrFrameNaN, field: 1},
	{name: "time beyond int64 µs", delim: ",", cols: []string{"t_s", "b"}, line: "1e14,1",
		reason: acquire.ReasonRange, err: acquire.ErrFrameRange, field: 1},
	{name: "binary garbage", delim: ",", cols: []string{"a"}, line: "\x00\xfe\x7f",
		reason: acquire.ReasonParse, err: acquire.ErrFrameSyntax, field: 1},
	{name: "overlong", delim: ",", cols: []string{"a"}, line: strings.Repeat("9", acquire.MaxLineBytes+1),
		reason: acquire.ReasonParse, err: acquire.ErrFrameTooLong},
}

// Ensure that delimited lines parse by their column map, and bad ones are
// rejected with the right reason and field.
func TestDelimitedFormat_Parse(t *testing.T) {
	for _, tt := range delimitedTests {
		t.Run(tt.name, func(t *testing.T) {
			f := acquire.DelimitedFormat{Delimiter: tt.delim, Columns: tt.cols}
			var rec acquire.DelimitedRecord
			err := f.Parse([]byte(tt.line), &rec)
			if tt.err == nil {
				require.NoError(t, err)
				if len(tt.want.Values) == 0 {
					tt.want.Values = nil
				}
				assert.Equal(t, tt.want, rec)
				assert.Len(t, f.Channels(), len(rec.Values))
				return
			}
			require.Error(t, err)
			assert.ErrorIs(t, err, tt.err)
			var fe *acquire.FrameError
			require.True(t, errors.As(err, &fe))
			assert.Equal(t, tt.reason, fe.Reason, "reason")
			assert.Equal(t, tt.field, fe.Field, "field")
		})
	}
}

// Ensure that Channels lists the value columns in order, without "_" and the
// time column.
func TestDelimitedFormat_Channels(t *testing.T) {
	f := acquire.DelimitedFormat{Columns: []string{"_", "n_fore", "t_ms", "_", "pitot", "alpha"}}
	assert.Equal(t, []string{"n_fore", "pitot", "alpha"}, f.Channels())
}

// Ensure that a steady stream of delimited lines allocates nothing.
func TestDelimitedFormat_NoAllocs(t *testing.T) {
	for _, delim := range []string{";", "\t", " "} {
		f := acquire.DelimitedFormat{Delimiter: delim, Columns: []string{"t_ms", "a", "_", "b", "c"}}
		line := []byte(strings.Join([]string{"1250.5", "812.4", "x", "201.9", "-3"}, delim) + "\r\n")
		rec := acquire.DelimitedRecord{Values: make([]float64, 0, 3)}
		allocs := testing.AllocsPerRun(200, func() {
			if err := f.Parse(line, &rec); err != nil {
				t.Fatal(err)
			}
		})
		assert.Zero(t, allocs, "delimiter %q", delim)
	}
}

func FuzzParseDelimited(f *testing.F) {
	for _, tt := range delimitedTests {
		f.Add([]byte(tt.line), tt.delim, strings.Join(tt.cols, ","))
	}
	f.Fuzz(func(t *testing.T, line []byte, delim, cols string) {
		if len(cols) > 200 {
			return
		}
		df := acquire.DelimitedFormat{Delimiter: delim, Columns: strings.Split(cols, ",")}
		var rec acquire.DelimitedRecord
		err := df.Parse(line, &rec)
		if err != nil {
			var fe *acquire.FrameError
			if !errors.As(err, &fe) || fe.Reason.String() == "unknown" {
				t.Fatalf("error %v is not a *FrameError with a known reason", err)
			}
			return
		}
		if len(rec.Values) != len(df.Channels()) {
			t.Fatalf("%d values for %d channels", len(rec.Values), len(df.Channels()))
		}
		for _, v := range rec.Values {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("accepted non-finite value %v from %q", v, line)
			}
		}
	})
}

func BenchmarkParseDelimited(b *testing.B) {
	f := acquire.DelimitedFormat{Delimiter: ";", Columns: []string{"t_ms", "n_fore", "n_aft", "_", "pitot", "alpha"}}
	line := []byte("  1250.5 ; 812.4 ; 790.25 ; OK ; 201.9 ; 6.02\r\n")
	rec := acquire.DelimitedRecord{Values: make([]float64, 0, 4)}
	b.ReportAllocs()
	b.SetBytes(int64(len(line)))
	for b.Loop() {
		if err := f.Parse(line, &rec); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "lines/s")
}

package acquire_test

import (
	"errors"
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
)

// Ensure that block payloads of docs/design.md §3.3 decode, and every malformed one is
// rejected with the right reason.
func TestDecodePayload(t *testing.T) {
	tests := []struct {
		name   string
		in     string
		reason acquire.Reason // checked when wantErr
		want   acquire.Block
		errMsg string
	}{
		{
			name: "design example",
			in:   `{"seq":17,"t_us":1733061000000000,"dt_us":1000,"v":{"n_fore":[812.1,813.0],"pitot":[201.4,201.9]}}`,
			want: acquire.Block{Source: "s", Seq: 17, T0Us: 1733061000000000, DtUs: 1000, Series: []acquire.Series{
				{Channel: "n_fore", Raw: []float64{812.1, 813.0}},
				{Channel: "pitot", Raw: []float64{201.4, 201.9}},
			}},
		},
		{name: "not json", in: `{"seq":1`, reason: acquire.ReasonParse, errMsg: "unexpected EOF"},
		{name: "missing seq", in: `{"t_us":1,"dt_us":1,"v":{"a":[1]}}`, reason: acquire.ReasonParse, errMsg: `missing "seq"`},
		{name: "zero dt", in: `{"seq":1,"t_us":1,"dt_us":0,"v":{"a":[1]}}`, reason: acquire.ReasonRange, errMsg: "dt_us = 0, want > 0"},
		{name: "no channels", in: `{"seq":1,"t_us":1,"dt_us":1,"v":{}}`, reason: acquire.ReasonFieldCount, errMsg: `no channels in "v"`},
		{name: "ragged", in: `{"seq":1,"t_us":1,"dt_us":1,"v":{"a":[1,2],"b":[1]}}`, reason: acquire.ReasonFieldCount, errMsg: `channel "b" has 1 samples, channel "a" has 2`},
		{name: "string sample", in: `{"seq":1,"t_us":1,"dt_us":1,"v":{"a":["x"]}}`, reason: acquire.ReasonParse, errMsg: `channel "a" sample 0: "x" is not a number`},
		{name: "unknown field", in: `{"seq":1,"t_us":1,"dt_us":1,"v":{"a":[1]},"x":2}`, reason: acquire.ReasonParse, errMsg: `unknown field "x"`},
		{name: "trailing", in: `{"seq":1,"t_us":1,"dt_us":1,"v":{"a":[1]}} {}`, reason: acquire.ReasonParse, errMsg: "trailing data"},
		{name: "negative seq", in: `{"seq":-1,"t_us":1,"dt_us":1,"v":{"a":[1]}}`, reason: acquire.ReasonParse, errMsg: "cannot unmarshal"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := acquire.DecodePayload("s", []byte(tt.in))
			if tt.errMsg != "" {
				require.Error(t, err)
				assert.ErrorIs(t, err, acquire.ErrPayload)
				var pe *acquire.PayloadError
				require.True(t, errors.As(err, &pe))
				assert.Equal(t, tt.reason, pe.Reason)
				assert.Contains(t, err.Error(), tt.errMsg)
				return
			}
			require.NoError(t, err)
			assert.Equal(t, tt.want, got)
		})
	}
}

// Ensure that null samples become NaN and survive an encode/decode round trip.
func TestPayload_NullIsNoSample(t *testing.T) {
	b, err := acquire.DecodePayload("s", []byte(`{"seq":2,"t_us":5,"dt_us":10,"v":{"a":[1.5,null,-2e-3]}}`))
	require.NoError(t, err)
	require.True(t, math.IsNaN(b.Series[0].Raw[1]))
	enc, err := acquire.EncodePayload(&b)
	require.NoError(t, err)
	assert.JSONEq(t, `{"seq":2,"t_us":5,"dt_us":10,"v":{"a":[1.5,null,-0.002]}}`, string(enc))
}

// FuzzDecodePayload: no panic on any input, and anything accepted round-trips
// through EncodePayload to the same block.
func FuzzDecodePayload(f *testing.F) {
	f.Add([]byte(`{"seq":17,"t_us":1733061000000000,"dt_us":1000,"v":{"n_fore":[812.1,813.0],"pitot":[201.4,201.9]}}`))
	f.Add([]byte(`{"seq":1,"t_us":-5,"dt_us":3,"v":{"a":[null,1e300]}}`))
	f.Add([]byte(`{"seq":1,"t_us":1,"dt_us":1,"v":{"a":[1,2],"b":[1]}}`))
	f.Add([]byte(`[]`))
	f.Fuzz(func(t *testing.T, data []byte) {
		b, err := acquire.DecodePayload("f", data)
		if err != nil {
			if !errors.Is(err, acquire.ErrPayload) {
				t.Fatalf("error %v does not wrap ErrPayload", err)
			}
			return
		}
		enc, err := acquire.EncodePayload(&b)
		if err != nil {
			t.Fatalf("accepted block does not encode: %v", err)
		}
		b2, err := acquire.DecodePayload("f", enc)
		if err != nil {
			t.Fatalf("re-decode of %s: %v", enc, err)
		}
		if b.Seq != b2.Seq || b.T0Us != b2.T0Us || b.DtUs != b2.DtUs || len(b.Series) != len(b2.Series) {
			t.Fatalf("round trip changed the header: %+v vs %+v", b, b2)
		}
		for i := range b.Series {
			for j, v := range b.Series[i].Raw {
				w := b2.Series[i].Raw[j]
				if v != w && !(math.IsNaN(v) && math.IsNaN(w)) {
					t.Fatalf("sample %d/%d: %v became %v", i, j, v, w)
				}
			}
		}
	})
}

// BenchmarkDecodePayload decodes a 100 ms block of 6 channels at 200 Hz
// (the demo's block), reporting samples per second.
func BenchmarkDecodePayload(b *testing.B) {
	blk := acquire.Block{Seq: 1, T0Us: 1733061000000000, DtUs: 5000}
	for _, name := range []string{"a_main", "alpha", "n_aft", "n_fore", "pitot", "t_water"} {
		raw := make([]float64, 20)
		for i := range raw {
			raw[i] = 4_000_000 + float64(i*37)
		}
		blk.Series = append(blk.Series, acquire.Series{Channel: name, Raw: raw})
	}
	data, err := acquire.EncodePayload(&blk)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		if _, err := acquire.DecodePayload("s", data); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.N)*20/b.Elapsed().Seconds(), "samples/s")
}

package storage

import (
	"bytes"
	"encoding/binary"
	"errors"
	"math"
	"testing"
	"time"

	"liftyard/acquire"
)

// Ensure that malformed block records give ErrCorrupt, each for its reason.
func TestDecodeBlock_Errors(t *testing.T) {
	good, err := encodeBlock(nil, &acquire.Block{Seq: 9, T0Us: 5, DtUs: 1000,
		Series: []acquire.Series{{Channel: "n_fore", Raw: []float64{1, 2}}}})
	if err != nil {
		t.Fatal(err)
	}
	withVersion := bytes.Clone(good)
	withVersion[0] = 2
	noChannels := bytes.Clone(good[:blockHeaderLen])
	binary.BigEndian.PutUint16(noChannels[33:], 0)
	for _, tc := range []struct {
		name string
		data []byte
		msg  string
	}{
		{"empty", nil, "block record of 0 bytes (header is 39)"},
		{"short header", good[:20], "block record of 20 bytes"},
		{"future version", withVersion, "block record version 2 (want 1)"},
		{"name cut", good[:blockHeaderLen+4], "channel 0 name cut short"},
		{"readings cut", good[:len(good)-1], "15 bytes of readings for 1 channels × 2 samples"},
		{"readings extra", append(bytes.Clone(good), 0), "17 bytes of readings"},
		{"samples without channels", noChannels, "2 samples but no channel"},
	} {
		var b acquire.Block
		err := decodeBlock(tc.data, &b)
		if !errors.Is(err, ErrCorrupt) || !bytes.Contains([]byte(err.Error()), []byte(tc.msg)) {
			t.Errorf("%s: err = %v, want ErrCorrupt with %q", tc.name, err, tc.msg)
		}
	}
}

// Ensure that a block decodes back to itself, NaN payload bits included,
// and that the encoding is canonical.
func TestEncodeBlock_RoundTrip(t *testing.T) {
	nanPayload := math.Float64frombits(0x7ff8_0000_dead_beef)
	in := acquire.Block{Seq: math.MaxUint64, T0Us: -42, DtUs: 250,
		Received: time.Date(2025, 6, 14, 9, 30, 0, 1, time.UTC),
		Series: []acquire.Series{
			{Channel: "n_fore", Raw: []float64{1.5, math.NaN(), math.Copysign(0, -1)}},
			{Channel: "", Raw: []float64{nanPayload, math.Inf(1), 1e-300}},
		}}
	data, err := encodeBlock(nil, &in)
	if err != nil {
		t.Fatal(err)
	}
	var out acquire.Block
	if err := decodeBlock(data, &out); err != nil {
		t.Fatal(err)
	}
	again, _ := encodeBlock(nil, &out)
	if !bytes.Equal(data, again) {
		t.Error("decode → encode changed the bytes")
	}
	if out.Seq != in.Seq || out.T0Us != in.T0Us || out.DtUs != in.DtUs || !out.Received.Equal(in.Received) {
		t.Errorf("header %+v", out)
	}
	if math.Float64bits(out.Series[1].Raw[0]) != 0x7ff8_0000_dead_beef || !math.Signbit(out.Series[0].Raw[2]) {
		t.Error("NaN payload or negative zero lost")
	}
}

// Ensure that keys sort as device time, negative times first.
func TestBlockKey_Order(t *testing.T) {
	t0s := []int64{math.MinInt64, -1_000_000, -1, 0, 1, 1_733_061_000_000_000, math.MaxInt64}
	var prev []byte
	for _, t0 := range t0s {
		k := blockKey(nil, &acquire.Block{T0Us: t0, Seq: 3})
		if prev != nil && bytes.Compare(prev, k) >= 0 {
			t.Errorf("key of t0 %d does not sort after the previous", t0)
		}
		if got := i64FromKey(k); got != t0 {
			t.Errorf("i64FromKey = %d, want %d", got, t0)
		}
		prev = k
	}
}

// FuzzDecodeBlock: decoding arbitrary bytes never panics; anything accepted
// encodes back to the same bytes; and a block built from the fuzz input
// round-trips through encode → decode.
func FuzzDecodeBlock(f *testing.F) {
	seed, _ := encodeBlock(nil, &acquire.Block{Seq: 1, T0Us: 1000, DtUs: 1000,
		Received: time.Unix(1_750_000_000, 0),
		Series: []acquire.Series{{Channel: "pitot", Raw: []float64{201.4, math.NaN()}},
			{Channel: "n_fore", Raw: []float64{812.1, 813}}}})
	f.Add(seed)
	f.Add(seed[:blockHeaderLen])
	f.Add([]byte{1})
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, data []byte) {
		var b acquire.Block
		if err := decodeBlock(data, &b); err == nil {
			again, err := encodeBlock(nil, &b)
			if err != nil {
				t.Fatalf("decoded block does not encode: %v", err)
			}
			if !bytes.Equal(again, data) {
				t.Fatalf("decode → encode changed the bytes:\n%x\n%x", data, again)
			}
		} else if !errors.Is(err, ErrCorrupt) {
			t.Fatalf("error %v does not wrap ErrCorrupt", err)
		}

		// Build a block from the bytes: channels of names and readings.
		if len(data) < 3 {
			return
		}
		nch := int(data[0]%4) + 1
		n := int(data[1] % 16)
		body := data[2:]
		in := acquire.Block{Seq: uint64(len(data)), T0Us: int64(len(data)) * -7, DtUs: int64(data[1])}
		for c := range nch {
			raw := make([]float64, n)
			for i := range raw {
				var buf [8]byte
				copy(buf[:], body[min(len(body), (c*n+i)%max(len(body), 1)):])
				raw[i] = math.Float64frombits(binary.LittleEndian.Uint64(buf[:]))
			}
			name := string(body[:min(len(body), c)])
			in.Series = append(in.Series, acquire.Series{Channel: name, Raw: raw})
		}
		enc, err := encodeBlock(nil, &in)
		if err != nil {
			t.Fatal(err)
		}
		var out acquire.Block
		if err := decodeBlock(enc, &out); err != nil {
			t.Fatalf("own encoding does not decode: %v", err)
		}
		if out.Seq != in.Seq || out.T0Us != in.T0Us || out.DtUs != in.DtUs || len(out.Series) != nch {
			t.Fatalf("header changed: %+v vs %+v", out, in)
		}
		for c := range in.Series {
			if out.Series[c].Channel != in.Series[c].Channel {
				t.Fatalf("channel %d name changed", c)
			}
			for i, v := range in.Series[c].Raw {
				if math.Float64bits(out.Series[c].Raw[i]) != math.Float64bits(v) {
					t.Fatalf("reading %d/%d changed", c, i)
				}
			}
		}
	})
}

// Ensure that segments without a design value store En as null and read it
// back as NaN, also when the field is absent.
func TestSegmentJSON_NaN(t *testing.T) {
	sg, err := decodeSegment([]byte(`{"index":3,"n":10}`))
	if err != nil {
		t.Fatal(err)
	}
	if !math.IsNaN(sg.En) || sg.Index != 3 {
		t.Errorf("absent en decoded as %v", sg.En)
	}
	sg.En = math.NaN()
	data, err := encodeSegment(&sg)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(data, []byte(`"en":null`)) {
		t.Errorf("NaN en stored as %s", data)
	}
	if _, err := decodeSegment([]byte(`{"en":"NaN?"}`)); !errors.Is(err, ErrCorrupt) {
		t.Errorf("bad number: %v", err)
	}
	sg.Index = -1
	if _, err := encodeSegment(&sg); !errors.Is(err, ErrBadRecord) {
		t.Errorf("negative index: %v", err)
	}
}

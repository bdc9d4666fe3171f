package storage

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"liftyard/acquire"
)

// Ensure that malformed version 1 records give ErrCorrupt, each for its
// reason.
func TestDecodeBlock_V1Errors(t *testing.T) {
	good, err := encodeBlockV1(nil, &acquire.Block{Seq: 9, T0Us: 5, DtUs: 1000,
		Series: []acquire.Series{{Channel: "n_fore", Raw: []float64{1, 2}}}})
	if err != nil {
		t.Fatal(err)
	}
	withVersion := bytes.Clone(good)
	withVersion[0] = 4
	noChannels := bytes.Clone(good[:blockHeaderLen])
	binary.BigEndian.PutUint16(noChannels[33:], 0)
	for _, tc := range []struct {
		name string
		data []byte
		msg  string
	}{
		{"empty", nil, "block record of 0 bytes"},
		{"short header", good[:20], "block record of 20 bytes (header is 39)"},
		{"future version", withVersion, "block record version 4 (this liftyard reads 1, 2 and 3"},
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

// Ensure that malformed version 2 records give ErrCorrupt, each for its
// reason.
func TestDecodeBlock_V2Errors(t *testing.T) {
	good, err := encodeBlock(nil, &acquire.Block{Seq: 9, T0Us: 5, DtUs: 1000,
		Series: []acquire.Series{{Channel: "n_fore", Raw: []float64{1, 2, 4, 7.5}}}})
	if err != nil {
		t.Fatal(err)
	}
	hdr := []byte{blockV2, 9, 10, 0xd0, 0x0f, 0}
	huge := binary.AppendUvarint(append(bytes.Clone(hdr), 1), 1<<30)
	noCh := append(bytes.Clone(hdr), 0, 5)
	badCodec := append(append(bytes.Clone(hdr), 1, 2, 1, 1, 'x'), 9)
	badShare := append(bytes.Clone(hdr), 2, 0, 1, 1, 'x', 3, 0) // second name shares 2 bytes of "x"
	noNumber := append(bytes.Clone(hdr), 2, 0, 1, 1, 'x', 0, 0) // "the one after x"
	longRun := append(bytes.Clone(hdr), 2, 0, 1, 1, '1', 0, 1)  // a run of 2 after the first of 2
	likeFirst := append(bytes.Clone(hdr), 1, 2, 1, 1, 'x', chanLike, 0)
	for _, tc := range []struct {
		name string
		data []byte
		msg  string
	}{
		{"header cut", good[:3], "header cut short"},
		{"name cut", good[:10], "channel 0 name cut short"},
		{"readings cut", good[:len(good)-1], `channel 0 ("n_fore") of 4 samples: channel data cut short`},
		{"trailing bytes", append(bytes.Clone(good), 0), "1 bytes after the last channel"},
		{"huge", huge, "1 channels × 1073741824 samples"},
		{"samples without channels", noCh, "5 samples but no channel"},
		{"unknown codec", badCodec, "channel data cut short or malformed"},
		{"name shares more than the previous", badShare, "channel 1 name cut short"},
		{"numbered run after a name without a number", noNumber, `channel 1 follows "x", which ends in no number`},
		{"numbered run past the last channel", longRun, "channel 1 name cut short"},
		{"like code without a scaled channel before", likeFirst, "channel data cut short or malformed"},
	} {
		var b acquire.Block
		err := decodeBlock(tc.data, &b)
		if !errors.Is(err, ErrCorrupt) || !bytes.Contains([]byte(err.Error()), []byte(tc.msg)) {
			t.Errorf("%s: err = %v, want ErrCorrupt with %q", tc.name, err, tc.msg)
		}
	}
}

// roundTrip encodes b, decodes it and fails unless every reading comes back
// bit for bit; it returns the encoded size.
func roundTrip(t testing.TB, in *acquire.Block) int {
	t.Helper()
	data, err := encodeBlock(nil, in)
	if err != nil {
		t.Fatal(err)
	}
	var out acquire.Block
	if err := decodeBlock(data, &out); err != nil {
		t.Fatalf("own encoding does not decode: %v", err)
	}
	if out.Seq != in.Seq || out.T0Us != in.T0Us || out.DtUs != in.DtUs || !out.Received.Equal(in.Received) ||
		len(out.Series) != len(in.Series) {
		t.Fatalf("header %+v, want %+v", out, in)
	}
	for c := range in.Series {
		if out.Series[c].Channel != in.Series[c].Channel || len(out.Series[c].Raw) != len(in.Series[c].Raw) {
			t.Fatalf("channel %d: %q of %d, want %q of %d", c, out.Series[c].Channel, len(out.Series[c].Raw),
				in.Series[c].Channel, len(in.Series[c].Raw))
		}
		for i, v := range in.Series[c].Raw {
			if got := out.Series[c].Raw[i]; math.Float64bits(got) != math.Float64bits(v) {
				t.Fatalf("channel %d reading %d: %x (%v), want %x (%v)", c, i,
					math.Float64bits(got), got, math.Float64bits(v), v)
			}
		}
	}
	again, err := encodeBlock(nil, &out)
	if err != nil || !bytes.Equal(again, data) {
		t.Fatalf("encode → decode → encode changed the bytes (%v)", err)
	}
	return len(data)
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
	roundTrip(t, &in)

	taps := acquire.Block{Seq: 1, DtUs: 10_000}
	for _, name := range []string{"tap_01", "tap_02", "tap_10", "tap_1", "pitot", "", "tap_01", "tap_01_ref", "τ_ü"} {
		taps.Series = append(taps.Series, acquire.Series{Channel: name, Raw: []float64{-12.25, 3}})
	}
	roundTrip(t, &taps)
}

// Ensure that every regime of sensor data round-trips bit for bit, and
// that each takes the codec it should (its size per reading says so).
func TestEncodeBlock_Regimes(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 14))
	gen := func(n int, f func(i int) float64) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = f(i)
		}
		return v
	}
	parse := func(s string) float64 {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	for _, tc := range []struct {
		name    string
		raw     []float64
		maxByte float64 // bytes per reading at most (codec choice), 0: no check
	}{
		{"adc counts, noise 100", gen(1000, func(i int) float64 {
			return math.Round(2_100_000 + 5000*math.Sin(float64(i)/300) + 100*rng.NormFloat64())
		}), 1.45},
		{"adc counts at full scale", gen(1000, func(i int) float64 {
			return float64([]int{-8_388_608, 8_388_607}[i%2])
		}), 3.2},
		{"two-decimal pressures", gen(1000, func(i int) float64 {
			return parse(strconv.FormatFloat(123.45+8*math.Sin(float64(i)/50)+2*rng.NormFloat64(), 'f', 2, 64))
		}), 1.6},
		{"six-decimal volts", gen(500, func(i int) float64 {
			return parse(strconv.FormatFloat(-0.5+float64(i)*1e-6+rng.Float64()*1e-4, 'f', 6, 64))
		}), 1.3},
		{"nine decimals", gen(100, func(i int) float64 { return parse("0.00000000" + strconv.Itoa(1+i%9)) }), 0.7},
		{"ten decimals (falls back)", gen(100, func(i int) float64 { return parse("0.000000000" + strconv.Itoa(1+i%9)) }), 0},
		{"random float64 bits", gen(300, func(int) float64 { return math.Float64frombits(rng.Uint64()) }), 8.1},
		{"random in [0,1)", gen(300, func(int) float64 { return rng.Float64() }), 8.1},
		{"constant", gen(5000, func(int) float64 { return 812.25 }), 0.01},
		{"constant NaN", gen(100, func(int) float64 { return math.NaN() }), 0.1},
		{"NaN gaps in counts", gen(400, func(i int) float64 {
			if i%50 == 7 {
				return math.NaN()
			}
			return float64(1000 + i%13)
		}), 1},
		{"±Inf and −0", []float64{math.Inf(1), math.Inf(-1), math.Copysign(0, -1), 0, 1}, 0},
		{"negative zero in decimals", []float64{-0.5, math.Copysign(0, -1), 0.25}, 0},
		{"near 2^53", []float64{1 << 52, -(1 << 52), 1<<53 - 1, 1 << 53, 1<<53 + 2}, 0},
		{"huge and tiny", []float64{math.MaxFloat64, -math.MaxFloat64, math.SmallestNonzeroFloat64, 1e-320}, 0},
		{"single sample", []float64{-4721}, 0},
		{"no samples", []float64{}, 0},
		{"linear ramp (second order)", gen(1000, func(i int) float64 { return float64(1_000_000 + 37*i) }), 0.05},
	} {
		t.Run(tc.name, func(t *testing.T) {
			b := acquire.Block{Seq: 7, T0Us: 1_773_478_800_000_000, DtUs: 1000, Received: time.Unix(1_773_478_800, 5),
				Series: []acquire.Series{{Channel: "ch", Raw: tc.raw}}}
			size := roundTrip(t, &b)
			if tc.maxByte > 0 {
				per := float64(size-blockOverhead(&b)) / float64(len(tc.raw))
				if per > tc.maxByte {
					t.Errorf("%.2f bytes per reading, want at most %.2f", per, tc.maxByte)
				}
			}
		})
	}
}

// blockOverhead is the header and names of b's encoding.
func blockOverhead(b *acquire.Block) int {
	e, _ := encodeBlock(nil, &acquire.Block{Seq: b.Seq, T0Us: b.T0Us, DtUs: b.DtUs, Received: b.Received})
	for _, s := range b.Series { // each test block has one channel: nothing shared
		e = binary.AppendUvarint(e, 1)
		e = binary.AppendUvarint(e, uint64(len(s.Channel)))
		e = append(e, s.Channel...)
	}
	return len(e)
}

// Ensure that what a scanner's channels share costs little: a numbered run
// of names (tap_01 … tap_64) is stored in two bytes, and a channel scaled
// like the one before it repeats no tag or width and codes its level
// against that channel's. Each count below is the layout's own arithmetic
// (docs/storage.md §2), so a change of layout that costs more fails here;
// 64 taps of white noise in 10-sample blocks stay near the entropy of
// their readings (σ 40 Pa in 0.01 Pa steps: 14 bits, 1.75 bytes).
func TestEncodeBlock_ScannerSharing(t *testing.T) {
	names := func(stem string, from, n, width int) []string {
		var out []string
		for i := range n {
			out = append(out, fmt.Sprintf("%s%0*d", stem, width, from+i))
		}
		return out
	}
	block := func(chs []string, raw func(c int) []float64) *acquire.Block {
		b := &acquire.Block{Seq: 3, T0Us: 1_773_478_800_000_000, DtUs: 10_000}
		for c, ch := range chs {
			b.Series = append(b.Series, acquire.Series{Channel: ch, Raw: raw(c)})
		}
		return b
	}
	same := func(c int) []float64 { return []float64{-12.25, -12.5, -12.75, -12.5} }
	header, _ := encodeBlock(nil, &acquire.Block{Seq: 3, T0Us: 1_773_478_800_000_000, DtUs: 10_000})
	header = header[:len(header)-2] // without its channel and sample counts
	for _, tc := range []struct {
		name      string
		chs       []string
		nameBytes int // after the header and the two counts
	}{
		{"a numbered run", names("tap_", 1, 64, 2), 1 + 1 + 6 + 2},        // "tap_01" in full, then (0, 62)
		{"numbers that grow a digit", names("p", 8, 5, 1), 1 + 1 + 2 + 2}, // p8, then p9 p10 p11 p12
		{"zero-padded past 99", names("k", 98, 4, 3), 1 + 1 + 4 + 2},      // k098 … k101
		{"two runs", append(names("a", 1, 3, 1), names("b", 1, 3, 1)...), 2*(1+1+2) + 2*2},
		{"no numbers", []string{"pitot", "vane", "temp"}, 2 + 5 + 2 + 4 + 2 + 4},
	} {
		t.Run(tc.name, func(t *testing.T) {
			b := block(tc.chs, same)
			size := roundTrip(t, b)
			counts := uvarintLen(uint64(len(tc.chs))) + 1
			// The readings −12.25 −12.5 −12.75 −12.5 go by their
			// differences (−25 −25 +25: 6 bits each, 3 bytes). The first
			// channel: a tag, the anchor (zigzag of −1225: 2 bytes), a
			// width and the 3 bytes; each other one a like code, an
			// anchor of 1 byte (0: the level of the one before) and the
			// same 3 bytes.
			channels := (1 + 2 + 1 + 3) + (len(tc.chs)-1)*(1+1+3)
			if want := len(header) + counts + tc.nameBytes + channels; size != want {
				t.Errorf("%d bytes, want %d", size, want)
			}
		})
	}

	// 64 taps, 10 samples of white noise (σ 40 Pa, two decimals): the
	// packed offsets take the width of the block's range, about 14 bits.
	rng := rand.New(rand.NewPCG(40, 64))
	noise := block(names("tap", 1, 64, 2), func(c int) []float64 {
		raw := make([]float64, 10)
		for i := range raw {
			raw[i] = math.Round(100*(-300+7.5*float64(c)+40*rng.NormFloat64())) / 100
		}
		return raw
	})
	size := roundTrip(t, noise)
	t.Logf("64 taps × 10 samples of white noise: %d bytes, %.2f per reading", size, float64(size)/640)
	if per := float64(size) / 640; per > 2.2 {
		t.Errorf("white noise: %.2f bytes per reading, want at most 2.2", per)
	}
}

// Ensure that many channels and long channels round-trip, and that a block
// above the reading bound is refused as a bad record, not stored.
func TestEncodeBlock_Huge(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	b := acquire.Block{Seq: 1, DtUs: 10}
	for c := range 300 {
		raw := make([]float64, 2000)
		for i := range raw {
			raw[i] = math.Round(rng.NormFloat64()*float64(c*c+1)) / 100
		}
		b.Series = append(b.Series, acquire.Series{Channel: strconv.Itoa(c), Raw: raw})
	}
	roundTrip(t, &b)
	long := acquire.Block{Seq: 2, Series: []acquire.Series{{Channel: "x", Raw: make([]float64, 1_000_000)}}}
	for i := range long.Series[0].Raw {
		long.Series[0].Raw[i] = float64(i % 1000)
	}
	roundTrip(t, &long)
	over := acquire.Block{Seq: 3, Series: []acquire.Series{{Channel: "a", Raw: make([]float64, maxBlockReadings/2+1)},
		{Channel: "b", Raw: make([]float64, maxBlockReadings/2+1)}}}
	if _, err := encodeBlock(nil, &over); !errors.Is(err, ErrBadRecord) {
		t.Errorf("block of %d readings: %v, want ErrBadRecord", maxBlockReadings+2, err)
	}
}

// Ensure that version 1 records still decode, bit for bit.
func TestDecodeBlock_V1(t *testing.T) {
	in := acquire.Block{Seq: 3, T0Us: -5, DtUs: 1000, Received: time.Unix(1_750_000_000, 0).UTC(),
		Series: []acquire.Series{{Channel: "pitot", Raw: []float64{201.4, math.Float64frombits(0x7ff8_0000_dead_beef), math.Copysign(0, -1)}}}}
	data, err := encodeBlockV1(nil, &in)
	if err != nil {
		t.Fatal(err)
	}
	var out acquire.Block
	if err := decodeBlock(data, &out); err != nil {
		t.Fatal(err)
	}
	if out.Seq != 3 || out.T0Us != -5 || !out.Received.Equal(in.Received) {
		t.Errorf("header %+v", out)
	}
	for i, v := range in.Series[0].Raw {
		if math.Float64bits(out.Series[0].Raw[i]) != math.Float64bits(v) {
			t.Errorf("reading %d changed", i)
		}
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

// FuzzDecodeBlock: decoding arbitrary bytes never panics and every error
// wraps ErrCorrupt; anything accepted encodes (as version 2) to a record
// that decodes to the same readings bit for bit; and a block built from the
// fuzz input round-trips through encode → decode.
func FuzzDecodeBlock(f *testing.F) {
	blk := &acquire.Block{Seq: 1, T0Us: 1000, DtUs: 1000,
		Received: time.Unix(1_750_000_000, 0),
		Series: []acquire.Series{{Channel: "pitot", Raw: []float64{201.4, math.NaN(), 201.5}},
			{Channel: "n_fore", Raw: []float64{812.1, 813, 815}},
			{Channel: "k", Raw: []float64{1, 1, 1}},
			{Channel: "x", Raw: []float64{1e300, -1e-300, 3}}}}
	v1, _ := encodeBlockV1(nil, blk)
	v2, _ := encodeBlock(nil, blk)
	next := *blk
	next.Seq, next.T0Us = 2, 4000
	v3 := encodeGroup(nil, []*acquire.Block{blk, &next})
	f.Add(v1)
	f.Add(v1[:blockHeaderLen])
	f.Add(v2)
	f.Add(v2[:12])
	f.Add(v3)
	f.Add(v3[:20])
	f.Add([]byte{1})
	f.Add([]byte{2})
	f.Add([]byte{3, 2})
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, data []byte) {
		if blocks, err := decodeRecord(data); err == nil {
			for i := range blocks {
				roundTrip(t, &blocks[i])
			}
			if len(blocks) > 1 {
				groupRoundTrip(t, blocks)
			}
		} else if !errors.Is(err, ErrCorrupt) {
			t.Fatalf("error %v does not wrap ErrCorrupt", err)
		}

		// Build a block from the bytes: channels of names and readings,
		// some as decimals so that the scaled codec is exercised.
		if len(data) < 3 {
			return
		}
		nch := int(data[0]%4) + 1
		n := int(data[1] % 64)
		body := data[2:]
		in := acquire.Block{Seq: uint64(len(data)), T0Us: int64(len(data)) * -7, DtUs: int64(data[1])}
		for c := range nch {
			raw := make([]float64, n)
			for i := range raw {
				var buf [8]byte
				copy(buf[:], body[min(len(body), (c*n+i)%max(len(body), 1)):])
				u := binary.LittleEndian.Uint64(buf[:])
				switch c {
				case 0:
					raw[i] = math.Float64frombits(u)
				default:
					raw[i] = float64(int64(u)>>(8*c+8)) / pow10[int(u%10)%(c*3+1)]
				}
			}
			name := string(body[:min(len(body), c)])
			in.Series = append(in.Series, acquire.Series{Channel: name, Raw: raw})
		}
		roundTrip(t, &in)
	})
}

// groupRoundTrip encodes blocks as a group record and fails unless it
// decodes to the same blocks, headers and readings bit for bit.
func groupRoundTrip(t testing.TB, blocks []acquire.Block) {
	t.Helper()
	ptrs := make([]*acquire.Block, len(blocks))
	for i := range blocks {
		ptrs[i] = &blocks[i]
	}
	data := encodeGroup(nil, ptrs)
	got, err := decodeRecord(data)
	if err != nil {
		t.Fatalf("own group record does not decode: %v", err)
	}
	if len(got) != len(blocks) {
		t.Fatalf("%d blocks back, want %d", len(got), len(blocks))
	}
	for i := range blocks {
		a, b := &blocks[i], &got[i]
		if a.Seq != b.Seq || a.T0Us != b.T0Us || a.DtUs != b.DtUs || !a.Received.Equal(b.Received) || len(a.Series) != len(b.Series) {
			t.Fatalf("block %d header %+v, want %+v", i, b, a)
		}
		for c := range a.Series {
			if a.Series[c].Channel != b.Series[c].Channel || len(a.Series[c].Raw) != len(b.Series[c].Raw) {
				t.Fatalf("block %d channel %d differs", i, c)
			}
			for k, v := range a.Series[c].Raw {
				if math.Float64bits(v) != math.Float64bits(b.Series[c].Raw[k]) {
					t.Fatalf("block %d %s[%d]: %v, want %v", i, a.Series[c].Channel, k, b.Series[c].Raw[k], v)
				}
			}
		}
	}
}

// Ensure that a group record gives back every block as it came, and that
// malformed ones are refused as corrupt.
func TestEncodeGroup_RoundTripAndErrors(t *testing.T) {
	var blocks []acquire.Block
	for seq := range uint64(5) {
		b := acquire.Block{Seq: 40 + seq, T0Us: 1_000_000 + int64(seq)*3000, DtUs: 1000,
			Received: time.Unix(1_773_478_800, int64(seq)*1_000_003).UTC()}
		n := int(seq%3) + 1 // blocks of 1, 2 and 3 samples
		for _, ch := range []string{"tap01", "tap02", "pitot"} {
			raw := make([]float64, n)
			for i := range raw {
				raw[i] = float64(int(seq)*10+i) / 100
			}
			if seq == 2 && ch == "pitot" {
				raw[0] = math.NaN()
			}
			b.Series = append(b.Series, acquire.Series{Channel: ch, Raw: raw})
		}
		blocks = append(blocks, b)
	}
	groupRoundTrip(t, blocks)
	good := encodeGroup(nil, []*acquire.Block{&blocks[0], &blocks[1]})
	for _, tc := range []struct {
		name string
		data []byte
		msg  string
	}{
		{"one block", []byte{blockGroup, 1}, "block count cut short or wrong"},
		{"header cut", good[:6], "header of block 0 cut short"},
		{"body cut", good[:len(good)-1], "channel data cut short"},
		{"trailing", append(bytes.Clone(good), 0), "bytes after the last channel"},
		{"as one block", good, "group record where one block was expected"},
	} {
		var err error
		if tc.name == "as one block" {
			err = decodeBlock(tc.data, &acquire.Block{})
		} else {
			_, err = decodeRecord(tc.data)
		}
		if !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), tc.msg) {
			t.Errorf("%s: %v, want ErrCorrupt with %q", tc.name, err, tc.msg)
		}
	}
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

// Ensure that each fixture really holds records of its version (so
// TestMigration_* test the old formats, not what the generator writes now).
func TestFixtures_RecordVersions(t *testing.T) {
	for path, version := range map[string]byte{"testdata/store-v1.db": blockV1, "testdata/store-v2.db": blockV2,
		"testdata/store-v3.db": blockGroup} {
		t.Run(filepath.Base(path), func(t *testing.T) { testFixtureVersion(t, path, version) })
	}
}

// testFixtureVersion checks that every record of the fixture at path is of
// version, or for the group fixture of version 2 or 3 with some of 3.
func testFixtureVersion(t *testing.T, path string, version byte) {
	db, err := bolt.Open(path, 0o600, &bolt.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	n, matching := 0, 0
	err = db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketRaw).ForEachBucket(func(run []byte) error {
			rb := tx.Bucket(bucketRaw).Bucket(run)
			return rb.ForEachBucket(func(src []byte) error {
				return rb.Bucket(src).ForEach(func(_, v []byte) error {
					if v[0] != version && (version != blockGroup || v[0] != blockV2) {
						t.Errorf("run %x source %s: record version %d", run, src, v[0])
					}
					if v[0] == version {
						matching++
					}
					n++
					return nil
				})
			})
		})
	})
	if err != nil || n < 3 || matching == 0 {
		t.Fatalf("%d records, %d of version %d: %v", n, matching, version, err)
	}
}

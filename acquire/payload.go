package acquire

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"strconv"

	"liftyard/rig"
)

// MaxPayloadSamples bounds the samples per channel in one payload, so a
// hostile or broken sender cannot make us allocate without limit. 65 536
// samples is over a minute of data at 1 kHz, far more than one block needs.
const MaxPayloadSamples = 1 << 16

// payload is the JSON block of docs/design.md §3.3:
//
//	{"seq":17,"t_us":1733061000000000,"dt_us":1000,"v":{"n_fore":[812.1,813.0],"pitot":[201.4,201.9]}}
//
// A null in an array means "no sample" and becomes NaN.
type payload struct {
	Seq  *uint64                       `json:"seq"`
	TUs  *int64                        `json:"t_us"`
	DtUs *int64                        `json:"dt_us"`
	V    map[string][]*json.RawMessage `json:"v"`
}

// DecodePayload parses one MQTT block payload. Series come out sorted by
// channel name. Errors are *PayloadError with the rejection reason; the
// caller counts them and carries on.
func DecodePayload(source string, data []byte) (Block, error) {
	bad := func(r Reason, format string, args ...any) (Block, error) {
		return Block{}, &PayloadError{Source: source, Reason: r, Msg: fmt.Sprintf(format, rig.Excerpts(format, args...)...)}
	}
	var p payload
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&p); err != nil {
		return bad(ReasonParse, "%v", err)
	}
	if dec.More() {
		return bad(ReasonParse, "trailing data after the JSON object")
	}
	switch {
	case p.Seq == nil:
		return bad(ReasonParse, "missing \"seq\"")
	case p.TUs == nil:
		return bad(ReasonParse, "missing \"t_us\"")
	case p.DtUs == nil:
		return bad(ReasonParse, "missing \"dt_us\"")
	case *p.DtUs <= 0:
		return bad(ReasonRange, "dt_us = %d, want > 0", *p.DtUs)
	case len(p.V) == 0:
		return bad(ReasonFieldCount, "no channels in \"v\"")
	}
	names := make([]string, 0, len(p.V))
	for name := range p.V {
		if name == "" {
			return bad(ReasonParse, "empty channel name")
		}
		names = append(names, name)
	}
	slices.Sort(names)
	n := len(p.V[names[0]])
	if n == 0 || n > MaxPayloadSamples {
		return bad(ReasonFieldCount, "channel %q has %d samples, want 1..%d", names[0], n, MaxPayloadSamples)
	}
	b := Block{Source: source, Seq: *p.Seq, T0Us: *p.TUs, DtUs: *p.DtUs, Series: make([]Series, len(names))}
	for i, name := range names {
		raw := p.V[name]
		if len(raw) != n {
			return bad(ReasonFieldCount, "channel %q has %d samples, channel %q has %d", name, len(raw), names[0], n)
		}
		vals := make([]float64, n)
		for j, r := range raw {
			if r == nil || string(*r) == "null" {
				vals[j] = math.NaN()
				continue
			}
			v, err := strconv.ParseFloat(string(*r), 64)
			if err != nil {
				return bad(ReasonParse, "channel %q sample %d: %s is not a number", name, j, *r)
			}
			if math.IsInf(v, 0) {
				return bad(ReasonRange, "channel %q sample %d: out of range", name, j)
			}
			vals[j] = v
		}
		b.Series[i] = Series{Channel: name, Raw: vals}
	}
	return b, nil
}

// EncodePayload writes b as a JSON block payload (NaN as null). It is the
// inverse of DecodePayload up to the order of the series.
func EncodePayload(b *Block) ([]byte, error) {
	if b.DtUs <= 0 {
		return nil, fmt.Errorf("encode block: dt_us = %d, want > 0", b.DtUs)
	}
	var buf bytes.Buffer
	buf.Grow(64 + 12*len(b.Series)*b.Len())
	fmt.Fprintf(&buf, `{"seq":%d,"t_us":%d,"dt_us":%d,"v":{`, b.Seq, b.T0Us, b.DtUs)
	for i, s := range b.Series {
		if i > 0 {
			buf.WriteByte(',')
		}
		name, err := json.Marshal(s.Channel)
		if err != nil {
			return nil, err
		}
		buf.Write(name)
		buf.WriteString(":[")
		for j, v := range s.Raw {
			if j > 0 {
				buf.WriteByte(',')
			}
			if math.IsNaN(v) {
				buf.WriteString("null")
				continue
			}
			if math.IsInf(v, 0) {
				return nil, fmt.Errorf("encode block: channel %q sample %d is infinite", s.Channel, j)
			}
			buf.Write(strconv.AppendFloat(buf.AvailableBuffer(), v, 'g', -1, 64))
		}
		buf.WriteByte(']')
	}
	buf.WriteString("}}")
	return buf.Bytes(), nil
}

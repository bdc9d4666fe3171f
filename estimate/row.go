package estimate

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"time"

	"liftyard/rig"
)

// Row is one result row rendered through the column table (Columns): each
// column's value, or nothing where the column does not apply to the row's
// kind or the row has no value. Exports, the HTTP API, the MQTT segment
// message and the report all build their segment rows from a Row, so they
// agree on names, units, presence and time format.
//
// A Row is a value: copies share nothing that changes.
type Row struct {
	vals []any // indexed like columns; nil means absent
}

// NewRow renders segment s of run through the column table. runKind is the
// kind of the run's rig, used when s carries no kind (KindOf).
func NewRow(run uint64, runKind rig.Kind, s *Segment) Row {
	sc := *s
	sc.Kind = KindOf(s, runKind)
	r := Row{vals: make([]any, len(columns))}
	for i := range columns {
		c := &columns[i]
		if !c.AppliesTo(sc.Kind) {
			continue
		}
		if v, ok := c.Read(run, &sc); ok {
			r.vals[i] = v
		}
	}
	return r
}

// Kind is the rig kind of the row ("" for the zero Row).
func (r Row) Kind() rig.Kind {
	s, _ := r.Value("kind")
	k, _ := s.(string)
	return rig.Kind(k)
}

// Value returns the value of the named column and whether the row has one.
// It panics on a name that is not in the table: that is a programming
// error, which the tests of every caller find.
func (r Row) Value(name string) (any, bool) {
	i, ok := columnIndex[name]
	if !ok {
		panic(fmt.Sprintf("estimate: no result column %q", name))
	}
	if r.vals == nil || r.vals[i] == nil {
		return nil, false
	}
	return r.vals[i], true
}

// Float returns the named float column, NaN when absent (for display code,
// which shows NaN as a dash).
func (r Row) Float(name string) float64 {
	v, ok := r.Value(name)
	if !ok {
		return math.NaN()
	}
	f, _ := v.(float64)
	return f
}

// Field is one present column of a row.
type Field struct {
	Column *Column
	V      any // of the Go type that Column.Type names
}

// Fields returns the row's present columns in table order.
func (r Row) Fields() []Field {
	var out []Field
	for i, v := range r.vals {
		if v != nil {
			out = append(out, Field{&columns[i], v})
		}
	}
	return out
}

// JSON returns the field's value as a JSON literal.
func (f Field) JSON() []byte {
	switch v := f.V.(type) {
	case string:
		b, _ := json.Marshal(v) // a string always marshals
		return b
	case time.Time:
		return strconv.AppendQuote(nil, v.UTC().Format(TimeLayout))
	}
	return []byte(f.Text())
}

// Text returns the field's value as CSV text: numbers as in JSON, times in
// TimeLayout, booleans as true/false.
func (f Field) Text() string {
	switch v := f.V.(type) {
	case int64:
		return strconv.FormatInt(v, 10)
	case float64:
		return string(appendFloat(nil, v))
	case string:
		return v
	case time.Time:
		return v.UTC().Format(TimeLayout)
	case bool:
		return strconv.FormatBool(v)
	}
	return fmt.Sprint(f.V)
}

// CSV returns the row's cells for the columns cols (ColumnsFor), "" where
// the row has no value.
func (r Row) CSV(cols []Column) []string {
	out := make([]string, len(cols))
	for j := range cols {
		if v, ok := r.Value(cols[j].Name); ok {
			out[j] = Field{&cols[j], v}.Text()
		}
	}
	return out
}

// Header returns the names of cols: the CSV header row.
func Header(cols []Column) []string {
	out := make([]string, len(cols))
	for i, c := range cols {
		out[i] = c.Name
	}
	return out
}

// MarshalJSON writes the row as one JSON object: the present columns in
// table order; absent ones are left out (never null, never 0).
func (r Row) MarshalJSON() ([]byte, error) {
	var b bytes.Buffer
	b.WriteByte('{')
	for i, f := range r.Fields() {
		if i > 0 {
			b.WriteByte(',')
		}
		b.Write(strconv.AppendQuote(nil, f.Column.Name))
		b.WriteByte(':')
		b.Write(f.JSON())
	}
	b.WriteByte('}')
	return b.Bytes(), nil
}

// UnmarshalJSON reads a row written by MarshalJSON. A key that is not a
// column, or a value of the wrong type, is an error; null is absent.
func (r *Row) UnmarshalJSON(data []byte) error {
	var m map[string]json.RawMessage
	if err := json.Unmarshal(data, &m); err != nil {
		return fmt.Errorf("result row: %w", err)
	}
	vals := make([]any, len(columns))
	for name, raw := range m {
		i, ok := columnIndex[name]
		if !ok {
			return fmt.Errorf("result row: unknown column %q", name)
		}
		if string(raw) == "null" {
			continue
		}
		v, err := decodeCell(columns[i].Type, raw)
		if err != nil {
			return fmt.Errorf("result row: column %q: %w", name, err)
		}
		vals[i] = v
	}
	r.vals = vals
	return nil
}

func decodeCell(t ColumnType, raw json.RawMessage) (any, error) {
	switch t {
	case TypeInt:
		var v int64
		err := json.Unmarshal(raw, &v)
		return v, err
	case TypeFloat:
		var v Num
		if err := json.Unmarshal(raw, &v); err != nil {
			return nil, err
		}
		if f := float64(v); finite(f) {
			return f, nil
		}
		return nil, fmt.Errorf("%s is not a finite number", raw)
	case TypeText:
		var v string
		err := json.Unmarshal(raw, &v)
		return v, err
	case TypeTime:
		var s string
		if err := json.Unmarshal(raw, &s); err != nil {
			return nil, err
		}
		v, err := time.Parse(TimeLayout, s)
		return v.UTC(), err
	case TypeBool:
		var v bool
		err := json.Unmarshal(raw, &v)
		return v, err
	}
	return nil, fmt.Errorf("column type %d", t)
}

// Num is a float64 that survives JSON, the one NaN-safe JSON number of
// liftyard (result rows, live estimates, stored records, calibration
// output). NaN is written as null and read back as NaN; ±Inf, which JSON
// cannot hold either, are written as the strings "+Inf" and "-Inf" and read
// back (an exact uncertainty has Dof = +Inf). Other values are written in
// the shortest form that reads back to the same float64 (strconv 'g', -1).
type Num float64

// MarshalJSON implements json.Marshaler.
func (n Num) MarshalJSON() ([]byte, error) {
	v := float64(n)
	switch {
	case math.IsNaN(v):
		return []byte("null"), nil
	case math.IsInf(v, 1):
		return []byte(`"+Inf"`), nil
	case math.IsInf(v, -1):
		return []byte(`"-Inf"`), nil
	}
	return appendFloat(nil, v), nil
}

// UnmarshalJSON implements json.Unmarshaler.
func (n *Num) UnmarshalJSON(b []byte) error {
	switch string(b) {
	case "null":
		*n = Num(math.NaN())
		return nil
	case `"+Inf"`:
		*n = Num(math.Inf(1))
		return nil
	case `"-Inf"`:
		*n = Num(math.Inf(-1))
		return nil
	}
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return fmt.Errorf("number %q: %w", b, err)
	}
	*n = Num(v)
	return nil
}

func appendFloat(b []byte, v float64) []byte { return strconv.AppendFloat(b, v, 'g', -1, 64) }

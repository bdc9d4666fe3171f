package storage

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"reflect"
	"slices"
	"strconv"
	"time"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/compress"
	"github.com/parquet-go/parquet-go/encoding"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/rig"
)

// # Parquet files (docs/export.md "Parquet")
//
// Written with github.com/parquet-go/parquet-go: pure Go, streams rows into
// row groups of bounded size, and lets us give the schema at run time (one
// column per channel). Every file carries, as key-value metadata:
//
//	liftyard.what      raw | values | segments
//	liftyard.run       the run id; liftyard.rig, liftyard.kind, liftyard.started
//	liftyard.columns   JSON: one object per column: name, unit, and for
//	                   sample files source, channel and quantity
//	liftyard.rig_toml  the rig file stored with the run
//	liftyard.timeline  the timeline source of a sample file
//
// Sample files (raw, values) have a required t_utc column,
// TIMESTAMP(MICROS, isAdjustedToUTC) on the aligned timeline (aligned.go),
// and one optional DOUBLE per channel, null where the CSV export has a
// blank cell. Segment files render the one result schema (estimate.Columns)
// with one optional column per result column.

// parquetRowGroupCells bounds a row group of a sample file: rows × columns,
// about 8 bytes each while buffered. 2 M cells is 16 MB: a row group holds
// a couple of minutes of 16 channels at 1 kHz, and memory stays bounded
// however long the run.
var parquetRowGroupCells = 2_000_000

// parquetBatch is how many rows are handed to the writer at once.
const parquetBatch = 1024

// ParquetColumn describes one column of a Parquet export, as written in
// the liftyard.columns metadata.
type ParquetColumn struct {
	Name     string `json:"name"`
	Unit     string `json:"unit,omitempty"`
	Source   string `json:"source,omitempty"`
	Channel  string `json:"channel,omitempty"`
	Quantity string `json:"quantity,omitempty"`
}

// Parquet metadata keys.
const (
	ParquetKeyWhat     = "liftyard.what"
	ParquetKeyRun      = "liftyard.run"
	ParquetKeyRig      = "liftyard.rig"
	ParquetKeyKind     = "liftyard.kind"
	ParquetKeyStarted  = "liftyard.started"
	ParquetKeyColumns  = "liftyard.columns"
	ParquetKeyRigTOML  = "liftyard.rig_toml"
	ParquetKeyTimeline = "liftyard.timeline"
)

// ParquetTimeColumn is the time column of a sample file.
const ParquetTimeColumn = "t_utc"

// rawUnit is the unit written for a raw reading: what the device sent
// (ADC counts, a value in the device's own unit) before calibration.
const rawUnit = "raw"

// ExportRawParquet writes the raw readings of run id as one Parquet file:
// the rows and columns of ExportRaw (aligned.go), t_utc a UTC timestamp,
// each reading a DOUBLE with its float64 bits as stored.
func (s *Store) ExportRawParquet(w io.Writer, id uint64) error {
	run, r, p, err := s.runPlan(id)
	if err != nil {
		return fmt.Errorf("export raw run %d: %w", id, err)
	}
	cols := make([]ParquetColumn, len(p.cols))
	for i, c := range p.cols {
		cols[i] = ParquetColumn{Name: p.name(c, c.Channel), Unit: rawUnit, Source: c.Source, Channel: c.Channel}
		if r != nil {
			if ch, ok := r.Channel(c.Channel); ok {
				cols[i].Quantity = string(ch.Quantity)
			}
		}
	}
	if err := s.writeAlignedParquet(w, id, run, "raw", p, cols, rawSamples); err != nil {
		return fmt.Errorf("export raw run %d: %w", id, err)
	}
	return nil
}

// ExportValuesParquet writes the calibrated values of run id (SI units,
// through cal as in ExportValues) as one Parquet file with the rows and
// column names of ExportValues.
func (s *Store) ExportValuesParquet(w io.Writer, id uint64, r *rig.Rig, cal *calibrate.Calibrator) error {
	if r == nil || cal == nil {
		return fmt.Errorf("export values run %d: a rig and a calibrator are needed", id)
	}
	run, err := s.Run(id)
	if err != nil {
		return fmt.Errorf("export values run %d: %w", id, err)
	}
	p, err := s.planAligned(id, r, rigOrder(r))
	if err != nil {
		return fmt.Errorf("export values run %d: %w", id, err)
	}
	cols := make([]ParquetColumn, len(p.cols))
	for i, c := range p.cols {
		ch, _ := r.Channel(c.Channel)
		cols[i] = ParquetColumn{Name: p.name(c, ValueColumn(ch)), Unit: SIUnit(ch.Quantity), Source: c.Source, Channel: c.Channel, Quantity: string(ch.Quantity)}
	}
	if err := s.writeAlignedParquet(w, id, run, "values", p, cols, calibratedSamples(cal)); err != nil {
		return fmt.Errorf("export values run %d: %w", id, err)
	}
	return nil
}

// siUnits is the SI unit of each quantity, as the values export writes it.
var siUnits = map[rig.Quantity]string{
	rig.QuantityForce:       "N",
	rig.QuantityMoment:      "N·m",
	rig.QuantityPressure:    "Pa",
	rig.QuantitySpeed:       "m/s",
	rig.QuantityAngle:       "rad",
	rig.QuantityTemperature: "K",
	rig.QuantityRotation:    "rad/s",
	rig.QuantityHumidity:    "1",
	rig.QuantityVoltage:     "V",
}

// SIUnit is the SI unit of quantity q in a values export ("" when q has
// none known).
func SIUnit(q rig.Quantity) string { return siUnits[q] }

// runMetadata is the file metadata every Parquet export carries.
func runMetadata(run Run, what string, cols []ParquetColumn) ([]parquet.WriterOption, error) {
	cj, err := json.Marshal(cols)
	if err != nil {
		return nil, err
	}
	kv := [][2]string{
		{ParquetKeyWhat, what},
		{ParquetKeyRun, strconv.FormatUint(run.ID, 10)},
		{ParquetKeyRig, run.Rig},
		{ParquetKeyKind, run.Kind},
		{ParquetKeyColumns, string(cj)},
	}
	if !run.Started.IsZero() {
		kv = append(kv, [2]string{ParquetKeyStarted, run.Started.UTC().Format(time.RFC3339Nano)})
	}
	if run.RigTOML != "" {
		kv = append(kv, [2]string{ParquetKeyRigTOML, run.RigTOML})
	}
	opts := []parquet.WriterOption{parquet.CreatedBy("liftyard", "", "")}
	for _, p := range kv {
		opts = append(opts, parquet.KeyValueMetadata(p[0], p[1]))
	}
	return opts, nil
}

// writeAlignedParquet streams the aligned rows of plan p (alignedRows) into
// a Parquet file with the columns cols, in row groups of at most
// parquetRowGroupCells cells.
func (s *Store) writeAlignedParquet(w io.Writer, id uint64, run Run, what string, p alignedPlan, cols []ParquetColumn, conv func(acquire.Block) sampleBlock) error {
	fields := orderedGroup{{ParquetTimeColumn, parquet.Timestamp(parquet.Microsecond)}}
	for _, c := range cols {
		fields = append(fields, orderedField{c.Name, parquet.Optional(parquet.Leaf(parquet.DoubleType))})
	}
	meta, err := runMetadata(run, what, cols)
	if err != nil {
		return err
	}
	meta = append(meta, parquet.KeyValueMetadata(ParquetKeyTimeline, p.primary))
	groupRows := int64(max(parquetBatch, parquetRowGroupCells/(len(cols)+1)))
	pw, err := newParquetWriter(w, fields, groupRows, meta)
	if err != nil {
		return err
	}
	rows := make([]parquet.Row, 0, parquetBatch)
	vals := make([]parquet.Value, 0, parquetBatch*(len(cols)+1))
	flush := func() error {
		if len(rows) == 0 {
			return nil
		}
		_, err := pw.WriteRows(rows)
		rows, vals = rows[:0], vals[:0]
		return err
	}
	err = s.alignedRows(id, p, conv, func(tUs int64, cells []float64) error {
		start := len(vals)
		vals = append(vals, parquet.Int64Value(tUs).Level(0, 0, 0))
		for j, v := range cells {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				vals = append(vals, parquet.NullValue().Level(0, 0, j+1))
			} else {
				vals = append(vals, parquet.DoubleValue(v).Level(0, 1, j+1))
			}
		}
		rows = append(rows, parquet.Row(vals[start:len(vals):len(vals)]))
		if len(rows) == parquetBatch {
			return flush()
		}
		return nil
	})
	if err == nil {
		err = flush()
	}
	if err != nil {
		pw.Close()
		return err
	}
	return pw.Close()
}

// newParquetWriter makes a writer for the schema of fields, with Snappy
// compression (read by every engine) and row groups of at most groupRows.
// A bad configuration is an error, never a panic.
func newParquetWriter(w io.Writer, fields orderedGroup, groupRows int64, meta []parquet.WriterOption) (*parquet.GenericWriter[any], error) {
	opts := append([]parquet.WriterOption{
		parquet.NewSchema("liftyard", fields),
		parquet.Compression(&parquet.Snappy),
		parquet.MaxRowsPerRowGroup(groupRows),
		parquet.PageBufferSize(64 << 10),
	}, meta...)
	cfg, err := parquet.NewWriterConfig(opts...)
	if err != nil {
		return nil, fmt.Errorf("parquet writer: %w", err)
	}
	return parquet.NewGenericWriter[any](w, cfg), nil
}

// ExportSegmentsParquet writes the result rows of run as one Parquet file:
// one optional column per column of the result schema that applies to the
// rows' kinds (estimate.ColumnsFor, as the CSV export), typed INT64,
// DOUBLE, STRING, BOOLEAN or TIMESTAMP(MICROS, UTC); absent values are
// null. Units are in liftyard.columns (and in the names, as in the CSV).
func ExportSegmentsParquet(w io.Writer, run Run, segs []estimate.Segment) error {
	rows := make([]estimate.Row, len(segs))
	var kinds []rig.Kind
	for i := range segs {
		rows[i] = estimate.NewRow(run.ID, rig.Kind(run.Kind), &segs[i])
		if k := rows[i].Kind(); !slices.Contains(kinds, k) {
			kinds = append(kinds, k)
		}
	}
	if len(kinds) == 0 && run.Kind != "" {
		kinds = append(kinds, rig.Kind(run.Kind))
	}
	cols := estimate.ColumnsFor(kinds...)
	fields := make(orderedGroup, len(cols))
	meta := make([]ParquetColumn, len(cols))
	for i, c := range cols {
		var leaf parquet.Node
		switch c.Type {
		case estimate.TypeInt:
			leaf = parquet.Int(64)
		case estimate.TypeFloat:
			leaf = parquet.Leaf(parquet.DoubleType)
		case estimate.TypeText:
			leaf = parquet.String()
		case estimate.TypeTime:
			leaf = parquet.Timestamp(parquet.Microsecond)
		case estimate.TypeBool:
			leaf = parquet.Leaf(parquet.BooleanType)
		default:
			return fmt.Errorf("export segments: column %q has a type Parquet export does not know", c.Name)
		}
		fields[i] = orderedField{c.Name, parquet.Optional(leaf)}
		meta[i] = ParquetColumn{Name: c.Name, Unit: c.Unit}
	}
	opts, err := runMetadata(run, "segments", meta)
	if err != nil {
		return err
	}
	pw, err := newParquetWriter(w, fields, 1<<16, opts)
	if err != nil {
		return err
	}
	prow := make(parquet.Row, len(cols))
	for _, r := range rows {
		for j := range cols {
			prow[j] = parquet.NullValue().Level(0, 0, j)
			v, ok := r.Value(cols[j].Name)
			if !ok {
				continue
			}
			var pv parquet.Value
			switch x := v.(type) {
			case int64:
				pv = parquet.Int64Value(x)
			case float64:
				pv = parquet.DoubleValue(x)
			case string:
				pv = parquet.ByteArrayValue([]byte(x))
			case time.Time:
				pv = parquet.Int64Value(x.UnixMicro())
			case bool:
				pv = parquet.BooleanValue(x)
			default:
				pw.Close()
				return fmt.Errorf("export segments: column %q holds a %T", cols[j].Name, v)
			}
			prow[j] = pv.Level(0, 1, j)
		}
		if _, err := pw.WriteRows([]parquet.Row{prow}); err != nil {
			pw.Close()
			return err
		}
	}
	return pw.Close()
}

// orderedGroup is a Parquet group node whose fields keep the order given
// (parquet.Group sorts them by name; a file reads best with its time column
// first and its channels in rig order).
type orderedGroup []orderedField

type orderedField struct {
	name string
	node parquet.Node
}

func (g orderedGroup) ID() int                     { return 0 }
func (g orderedGroup) String() string              { return "group" }
func (g orderedGroup) Type() parquet.Type          { return parquet.Group{}.Type() }
func (g orderedGroup) Optional() bool              { return false }
func (g orderedGroup) Repeated() bool              { return false }
func (g orderedGroup) Required() bool              { return true }
func (g orderedGroup) Leaf() bool                  { return false }
func (g orderedGroup) Encoding() encoding.Encoding { return nil }
func (g orderedGroup) Compression() compress.Codec { return nil }
func (g orderedGroup) GoType() reflect.Type        { return reflect.TypeFor[map[string]any]() }
func (g orderedGroup) Fields() []parquet.Field {
	out := make([]parquet.Field, len(g))
	for i := range g {
		out[i] = &fieldNode{Node: g[i].node, name: g[i].name}
	}
	return out
}

// fieldNode is one named field of an orderedGroup.
type fieldNode struct {
	parquet.Node
	name string
}

func (f *fieldNode) Name() string { return f.name }

// Value is used only when a Go value is written through the schema, which
// these exports never do (they write parquet.Row values).
func (f *fieldNode) Value(base reflect.Value) reflect.Value {
	if base.Kind() == reflect.Map {
		return base.MapIndex(reflect.ValueOf(f.name))
	}
	return reflect.Value{}
}

package storage_test

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/apache/arrow-go/v18/parquet/file"
	"github.com/apache/arrow-go/v18/parquet/pqarrow"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/rig"
	"liftyard/storage"
)

// The Parquet files are read back here with Apache Arrow's Go reader
// (github.com/apache/arrow-go/v18 parquet/pqarrow), a Parquet
// implementation independent of the writer's (parquet-go), used by the
// tests only.

// arrowTable reads a whole Parquet file with arrow-go and returns its
// columns by name (chunks concatenated), its key-value metadata and its
// row groups' row counts.
type arrowFile struct {
	fields    map[string]arrow.Field
	order     []string
	cols      map[string][]arrow.Array
	meta      map[string]string
	groupRows []int64
	rows      int64
}

func readArrow(t *testing.T, data []byte) *arrowFile {
	t.Helper()
	pf, err := file.NewParquetReader(bytes.NewReader(data))
	if err != nil {
		t.Fatalf("arrow-go cannot open the file: %v", err)
	}
	defer pf.Close()
	af := &arrowFile{fields: map[string]arrow.Field{}, cols: map[string][]arrow.Array{}, meta: map[string]string{}}
	kv := pf.MetaData().KeyValueMetadata()
	for i, k := range kv.Keys() {
		af.meta[k] = kv.Values()[i]
	}
	for g := range pf.NumRowGroups() {
		af.groupRows = append(af.groupRows, pf.MetaData().RowGroup(g).NumRows())
	}
	fr, err := pqarrow.NewFileReader(pf, pqarrow.ArrowReadProperties{}, memory.DefaultAllocator)
	if err != nil {
		t.Fatal(err)
	}
	tbl, err := fr.ReadTable(t.Context())
	if err != nil {
		t.Fatalf("arrow-go cannot read the table: %v", err)
	}
	t.Cleanup(tbl.Release)
	af.rows = tbl.NumRows()
	for i := range int(tbl.NumCols()) {
		f := tbl.Schema().Field(i)
		af.fields[f.Name] = f
		af.order = append(af.order, f.Name)
		af.cols[f.Name] = tbl.Column(i).Data().Chunks()
	}
	return af
}

// at returns row i of column name: (value, false) or (nil, true) for null.
func (af *arrowFile) at(t *testing.T, name string, i int) (any, bool) {
	t.Helper()
	chunks, ok := af.cols[name]
	if !ok {
		t.Fatalf("no column %q (columns %v)", name, af.order)
	}
	for _, c := range chunks {
		if i >= c.Len() {
			i -= c.Len()
			continue
		}
		if c.IsNull(i) {
			return nil, true
		}
		switch a := c.(type) {
		case *array.Float64:
			return a.Value(i), false
		case *array.Int64:
			return a.Value(i), false
		case *array.Timestamp:
			return int64(a.Value(i)), false
		case *array.String:
			return a.Value(i), false
		case *array.Boolean:
			return a.Value(i), false
		}
		t.Fatalf("column %q: arrow type %s", name, c.DataType())
	}
	t.Fatalf("column %q has no row %d", name, i)
	return nil, true
}

// awkward returns readings that a text or float32 path would spoil: ADC
// counts, long fractions, −0, a subnormal, the largest float64, and a NaN
// (no sample) now and then.
func awkward(rng *rand.Rand, i int) float64 {
	switch i % 11 {
	case 3:
		return math.Copysign(0, -1)
	case 5:
		return 5e-324
	case 7:
		return rng.NormFloat64() * 1e-9
	case 9:
		return math.NaN()
	case 10:
		return math.MaxFloat64 / float64(1+rng.IntN(3))
	}
	return float64(rng.IntN(1<<24) - 1<<23)
}

// twoSourceRun stores a run of the example tow rig (its rig file stored
// with it) whose carriage logger sends the balance at 1 kHz on a clock
// from power-up and a second node sends the pitot at 250 Hz on another.
func twoSourceRun(t *testing.T, s *storage.Store, blocks int) (uint64, *rig.Rig) {
	t.Helper()
	text, err := os.ReadFile(filepath.Join("..", "testdata", "rigs", "foil-towtank.toml"))
	if err != nil {
		t.Fatal(err)
	}
	r, err := rig.Parse("foil-towtank.toml", text)
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	id, err := s.CreateRun(storage.Run{Rig: r.Name, Kind: string(r.Kind), RigTOML: string(text), Started: start})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(14, 14))
	var bs []*acquire.Block
	k := 0
	for seq := range uint64(blocks) {
		el := int64(seq) * 100_000 // 100 samples at 1 kHz per block
		bal := &acquire.Block{Source: "carriage", Seq: seq, T0Us: 50_000_000 + el, DtUs: 1000,
			Received: start.Add(time.Duration(el+99_000+800)*time.Microsecond + time.Duration(rng.IntN(500))*time.Microsecond)}
		for _, ch := range []string{"n_fore", "n_aft", "a_main", "alpha", "t_water"} {
			v := make([]float64, 100)
			for i := range v {
				v[i] = awkward(rng, k)
				k++
			}
			bal.Series = append(bal.Series, acquire.Series{Channel: ch, Raw: v})
		}
		pit := &acquire.Block{Source: "pitotnode", Seq: seq, T0Us: 900_000_000 + el + 1300, DtUs: 4000,
			Received: start.Add(time.Duration(el+1300+96_000+6000)*time.Microsecond + time.Duration(rng.IntN(3000))*time.Microsecond)}
		v := make([]float64, 25)
		for i := range v {
			v[i] = 3e6 + float64(rng.IntN(100000)) + 0.25*float64(i%4)
		}
		pit.Series = []acquire.Series{{Channel: "pitot", Raw: v}}
		bs = append(bs, bal, pit)
	}
	writeBlocks(t, s, id, bs...)
	return id, r
}

// csvCells reads a CSV export: header and rows.
func csvCells(t *testing.T, data []byte) ([]string, [][]string) {
	t.Helper()
	recs, err := csv.NewReader(bytes.NewReader(data)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return recs[0], recs[1:]
}

// Ensure that the raw and values Parquet files, read by arrow-go, hold the
// CSV export's rows bit for bit: t_utc as TIMESTAMP(µs, UTC) equal to t_s,
// each reading's float64 bits, null where the CSV is blank; that row
// groups stay within their bound; that the carriage readings are the stored
// ones, bit for bit; and that units, rig and run are in the metadata.
func TestExportParquet_SamplesReadBackByArrow(t *testing.T) {
	storage.SetParquetRowGroupCells(t, 7*1024) // 1024 rows of 7 columns
	s := MustOpenStore(t)
	id, r := twoSourceRun(t, s, 40)
	cal, err := calibrate.NewCalibrator(r)
	if err != nil {
		t.Fatal(err)
	}
	for _, what := range []string{"raw", "values"} {
		t.Run(what, func(t *testing.T) {
			var pq, cs bytes.Buffer
			if what == "raw" {
				err = s.ExportRawParquet(&pq, id)
				if err == nil {
					err = s.ExportRaw(&cs, id)
				}
			} else {
				err = s.ExportValuesParquet(&pq, id, r, cal)
				if err == nil {
					err = s.ExportValues(&cs, id, r, cal)
				}
			}
			if err != nil {
				t.Fatal(err)
			}
			af := readArrow(t, pq.Bytes())
			header, rows := csvCells(t, cs.Bytes())
			if af.rows != int64(len(rows)) || len(rows) != 4000 {
				t.Fatalf("%d Parquet rows, %d CSV rows, want 4000 (one per carriage sample)", af.rows, len(rows))
			}
			wantCols := append([]string{"t_utc"}, header[1:]...)
			if strings.Join(af.order, ",") != strings.Join(wantCols, ",") {
				t.Fatalf("columns %v, want %v", af.order, wantCols)
			}
			ts, ok := af.fields["t_utc"].Type.(*arrow.TimestampType)
			if !ok || ts.Unit != arrow.Microsecond || ts.TimeZone != "UTC" || af.fields["t_utc"].Nullable {
				t.Errorf("t_utc is %v (nullable %v), want a required timestamp[us, tz=UTC]", af.fields["t_utc"].Type, af.fields["t_utc"].Nullable)
			}
			for _, g := range af.groupRows {
				if g > 1024 {
					t.Errorf("a row group of %d rows, bound 1024", g)
				}
			}
			if len(af.groupRows) != 4 {
				t.Errorf("%d row groups (%v), want 4", len(af.groupRows), af.groupRows)
			}
			nulls := 0
			for i, rec := range rows {
				tv, _ := af.at(t, "t_utc", i)
				if want := strings.Replace(rec[0], ".", "", 1); strconv.FormatInt(tv.(int64), 10) != strings.TrimLeft(want, "0") {
					t.Fatalf("row %d: t_utc %d µs, CSV t_s %s", i, tv, rec[0])
				}
				for j, name := range header[1:] {
					v, null := af.at(t, name, i)
					cell := rec[j+1]
					if null != (cell == "") {
						t.Fatalf("row %d %s: null %v, CSV %q", i, name, null, cell)
					}
					if null {
						nulls++
						continue
					}
					w, err := strconv.ParseFloat(cell, 64)
					if err != nil {
						t.Fatal(err)
					}
					if math.Float64bits(v.(float64)) != math.Float64bits(w) {
						t.Fatalf("row %d %s: %v (bits %x), CSV %s", i, name, v, math.Float64bits(v.(float64)), cell)
					}
				}
			}
			if nulls == 0 {
				t.Error("no null cell: the NaN readings should be null")
			}
			if af.meta["liftyard.what"] != what || af.meta["liftyard.run"] != strconv.FormatUint(id, 10) ||
				af.meta["liftyard.rig"] != "foil-towtank" || af.meta["liftyard.timeline"] != "carriage" ||
				!strings.Contains(af.meta["liftyard.rig_toml"], `name  = "foil-towtank"`) {
				t.Errorf("metadata %v", af.meta)
			}
			var cols []storage.ParquetColumn
			if err := json.Unmarshal([]byte(af.meta["liftyard.columns"]), &cols); err != nil {
				t.Fatal(err)
			}
			if len(cols) != len(header)-1 {
				t.Fatalf("liftyard.columns %v", cols)
			}
			for _, c := range cols {
				want := "raw"
				if what == "values" {
					want = map[string]string{"n_fore": "N", "n_aft": "N", "a_main": "N", "alpha": "rad", "t_water": "K", "pitot": "Pa"}[c.Channel]
				}
				if c.Unit != want || c.Source == "" || c.Quantity == "" {
					t.Errorf("column %+v: want unit %q, a source and a quantity", c, want)
				}
			}
		})
	}

	// The raw carriage readings are the stored ones, in order, bit for bit.
	var pq bytes.Buffer
	if err := s.ExportRawParquet(&pq, id); err != nil {
		t.Fatal(err)
	}
	af := readArrow(t, pq.Bytes())
	i := 0
	err = s.RawBlocks(id, func(b acquire.Block) error {
		if b.Source != "carriage" {
			return nil
		}
		for k := range b.Len() {
			for _, sr := range b.Series {
				v, null := af.at(t, "carriage/"+sr.Channel, i+k)
				if math.IsNaN(sr.Raw[k]) != null || (!null && math.Float64bits(v.(float64)) != math.Float64bits(sr.Raw[k])) {
					t.Fatalf("sample %d %s: Parquet %v, stored %v", i+k, sr.Channel, v, sr.Raw[k])
				}
			}
		}
		i += b.Len()
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}

// Ensure that the segment Parquet file carries the result schema: the
// columns of the CSV export in its order, typed (int64, double, string,
// timestamp[us, UTC]), null where the CSV cell is empty, every value equal
// to the CSV's (floats bit for bit), units in liftyard.columns.
func TestExportParquet_SegmentsReadBackByArrow(t *testing.T) {
	run, segs := exportSegments()
	var pq, cs bytes.Buffer
	if err := storage.ExportSegmentsParquet(&pq, run, segs); err != nil {
		t.Fatal(err)
	}
	if err := storage.ExportSegments(&cs, run, segs, "csv"); err != nil {
		t.Fatal(err)
	}
	af := readArrow(t, pq.Bytes())
	header, rows := csvCells(t, cs.Bytes())
	if strings.Join(af.order, ",") != strings.Join(header, ",") {
		t.Fatalf("columns %v\nwant %v", af.order, header)
	}
	if af.rows != int64(len(rows)) {
		t.Fatalf("%d rows, want %d", af.rows, len(rows))
	}
	for i, rec := range rows {
		for j, name := range header {
			v, null := af.at(t, name, i)
			cell := rec[j]
			if null != (cell == "") {
				t.Fatalf("row %d %s: null %v, CSV %q", i, name, null, cell)
			}
			if null {
				continue
			}
			var got string
			switch x := v.(type) {
			case float64:
				w, err := strconv.ParseFloat(cell, 64)
				if err != nil || math.Float64bits(x) != math.Float64bits(w) {
					t.Errorf("row %d %s: %v, CSV %s", i, name, x, cell)
				}
				continue
			case int64:
				got = strconv.FormatInt(x, 10)
				if _, isTime := af.fields[name].Type.(*arrow.TimestampType); isTime {
					got = time.UnixMicro(x).UTC().Format(time.RFC3339Nano)
				}
			case string:
				got = x
			case bool:
				got = strconv.FormatBool(x)
			}
			if got != cell {
				t.Errorf("row %d %s: %q, CSV %q", i, name, got, cell)
			}
		}
	}
	ts, ok := af.fields["t_start"].Type.(*arrow.TimestampType)
	if !ok || ts.Unit != arrow.Microsecond || ts.TimeZone != "UTC" {
		t.Errorf("t_start is %v", af.fields["t_start"].Type)
	}
	var cols []storage.ParquetColumn
	if err := json.Unmarshal([]byte(af.meta["liftyard.columns"]), &cols); err != nil {
		t.Fatal(err)
	}
	units := map[string]string{}
	for _, c := range cols {
		units[c.Name] = c.Unit
	}
	if units["q_pa"] != "Pa" || units["alpha_deg"] != "°" && units["alpha_deg"] != "deg" {
		t.Errorf("units %v", units)
	}
	if af.meta["liftyard.what"] != "segments" || af.meta["liftyard.run"] != "3" || af.meta["liftyard.rig"] != "tow-fin-a" {
		t.Errorf("metadata %v", af.meta)
	}
}

package main

import (
	"bytes"
	"encoding/csv"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/apache/arrow-go/v18/parquet/file"
	"github.com/apache/arrow-go/v18/parquet/pqarrow"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/storage"
)

// parquetRows reads a Parquet file with arrow-go (an implementation
// independent of the writer) and returns its row count and column names.
func parquetRows(t *testing.T, path string) (int64, []string) {
	t.Helper()
	data, err := os.ReadFile(path)
	require.NoError(t, err)
	pf, err := file.NewParquetReader(bytes.NewReader(data))
	require.NoError(t, err, path)
	defer pf.Close()
	fr, err := pqarrow.NewFileReader(pf, pqarrow.ArrowReadProperties{}, memory.DefaultAllocator)
	require.NoError(t, err)
	tbl, err := fr.ReadTable(t.Context())
	require.NoError(t, err)
	defer tbl.Release()
	var names []string
	for _, f := range tbl.Schema().Fields() {
		names = append(names, f.Name)
	}
	return tbl.NumRows(), names
}

// listFiles lists the files under dir, relative, sorted.
func listFiles(t *testing.T, dir string) []string {
	t.Helper()
	var out []string
	require.NoError(t, filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
		if err != nil || info.IsDir() {
			return err
		}
		rel, err := filepath.Rel(dir, p)
		out = append(out, rel)
		return err
	}))
	sort.Strings(out)
	return out
}

// Ensure that `export --campaign DIR` writes one Parquet file per run and
// dataset under what/rig=NAME/date=YYYY-MM-DD/run-ID.parquet, readable by
// an independent reader with the rows of the CSV export; skips a run still
// recording and a values file without a rig file; keeps existing files on
// a second run and writes the same bytes again with --replace.
func TestExport_Campaign(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "campaign.db")
	for _, f := range []string{importCSV, filepath.Join("..", "..", "testdata", "import", "foil-towtank-raw-v1-relative.csv")} {
		code, _, errOut := runCLI(t, "import", "--rig", towtankRig, "--db", db, f)
		require.Equal(t, 0, code, errOut)
	}
	// Run 3: another rig on another day, no rig file; run 4: left
	// `recording` by a crash, so a read-only open shows it interrupted and
	// it is exported with what it holds.
	store, err := storage.Open(db, storage.Options{})
	require.NoError(t, err)
	day := time.Date(2026, 3, 15, 23, 59, 0, 0, time.UTC)
	id3, err := store.CreateRun(storage.Run{Rig: "yard-mast", Kind: "foil", Started: day})
	require.NoError(t, err)
	w := store.NewWriter(id3, storage.WriterConfig{})
	in := make(chan storage.Item, 1)
	in <- storage.Item{Block: &acquire.Block{Source: "mast", T0Us: day.UnixMicro(), DtUs: 10_000,
		Series: []acquire.Series{{Channel: "dp", Raw: []float64{1, 2, 3}}}}}
	close(in)
	require.NoError(t, w.Run(t.Context(), in))
	require.NoError(t, store.FinishRun(id3, day.Add(time.Minute), storage.StatusComplete, nil))
	_, err = store.CreateRun(storage.Run{Rig: "foil-towtank", Kind: "foil", Started: day})
	require.NoError(t, err)
	require.NoError(t, store.Close())

	out := filepath.Join(dir, "campaign")
	code, _, errOut := runCLI(t, "export", "--db", db, "--campaign", out)
	require.Equal(t, 0, code, errOut)
	t.Log(errOut)
	want := []string{
		"raw/rig=foil-towtank/date=2026-03-14/run-1.parquet",
		"raw/rig=foil-towtank/date=2026-03-14/run-2.parquet",
		"raw/rig=foil-towtank/date=2026-03-15/run-4.parquet",
		"raw/rig=yard-mast/date=2026-03-15/run-3.parquet",
		"segments/rig=foil-towtank/date=2026-03-14/run-1.parquet",
		"segments/rig=foil-towtank/date=2026-03-14/run-2.parquet",
		"segments/rig=foil-towtank/date=2026-03-15/run-4.parquet",
		"segments/rig=yard-mast/date=2026-03-15/run-3.parquet",
		"values/rig=foil-towtank/date=2026-03-14/run-1.parquet",
		"values/rig=foil-towtank/date=2026-03-14/run-2.parquet",
	}
	require.Equal(t, want, listFiles(t, out))
	require.NotContains(t, errOut, "still recording")
	require.Contains(t, errOut, "run 3 has no stored rig file: no values file")
	require.Contains(t, errOut, "10 files written, 0 kept")

	// The raw file of run 1 has the CSV export's rows and columns.
	code, csvOut, errOut := runCLI(t, "export", "--db", db, "--run", "1", "--what", "raw")
	require.Equal(t, 0, code, errOut)
	recs, err := csv.NewReader(strings.NewReader(csvOut)).ReadAll()
	require.NoError(t, err)
	n, names := parquetRows(t, filepath.Join(out, want[0]))
	require.Equal(t, int64(len(recs)-1), n)
	require.Equal(t, append([]string{"t_utc"}, recs[0][1:]...), names)
	n, names = parquetRows(t, filepath.Join(out, want[4]))
	require.Equal(t, int64(5), n, "five segments")
	require.Contains(t, names, "cl_u95")

	// Again: every file is kept, untouched.
	before, err := os.ReadFile(filepath.Join(out, want[4]))
	require.NoError(t, err)
	code, _, errOut = runCLI(t, "export", "--db", db, "--campaign", out)
	require.Equal(t, 0, code, errOut)
	require.Contains(t, errOut, "0 files written, 10 kept")
	// --replace writes them again, byte for byte the same.
	code, _, errOut = runCLI(t, "export", "--db", db, "--campaign", out, "--what", "segments", "--replace")
	require.Equal(t, 0, code, errOut)
	require.Contains(t, errOut, "4 files written, 0 kept")
	after, err := os.ReadFile(filepath.Join(out, want[4]))
	require.NoError(t, err)
	require.True(t, bytes.Equal(before, after), "the export is deterministic")
	require.Equal(t, want, listFiles(t, out), "no temporary file is left")

	// One run, one file: --format parquet --out.
	for what, rows := range map[string]int64{"segments": 5, "raw": int64(len(recs) - 1), "values": int64(len(recs) - 1)} {
		one := filepath.Join(dir, what+".parquet")
		code, _, errOut = runCLI(t, "export", "--db", db, "--run", "1", "--what", what, "--format", "parquet", "--out", one)
		require.Equal(t, 0, code, errOut)
		n, _ := parquetRows(t, one)
		require.Equal(t, rows, n, what)
	}

	// Bad usage exits 2.
	for _, args := range [][]string{
		{"--campaign", out, "--out", "x.parquet"},
		{"--campaign", out, "--what", "polar"},
		{"--replace"},
		{"--what", "raw", "--format", "xlsx"},
	} {
		code, _, errOut := runCLI(t, append([]string{"export", "--db", db}, args...)...)
		require.Equal(t, 2, code, "%v: %s", args, errOut)
	}
}

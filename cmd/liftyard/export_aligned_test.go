package main

import (
	"bytes"
	"encoding/csv"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/rig"
	"liftyard/storage"
)

// twoSourceRigTOML is testdata/rigs/foil-towtank.toml with its one MQTT
// carriage logger replaced by the issue 15 pair: the balance, angle and
// temperature on a serial amplifier sending delimited lines, and the pitot
// on an MQTT node (an invented scenario).
func twoSourceRigTOML(t *testing.T) string {
	t.Helper()
	text, err := os.ReadFile(towtankRig)
	require.NoError(t, err)
	s := string(text)
	a, b := strings.Index(s, "[[source]]"), strings.Index(s, "# Channels.")
	require.True(t, a > 0 && b > a)
	return s[:a] + `[[source]]
name    = "amp"
type    = "serial"
port    = "/dev/ttyAMP0"
format  = "delimited"
columns = ["t_ms", "n_fore", "n_aft", "a_main", "alpha", "t_water"]

[[source]]
name     = "pitotnode"
type     = "mqtt"
broker   = "tcp://127.0.0.1:1883"
topic    = "liftyard/towtank/pitot"
channels = ["pitot"]

` + s[b:]
}

// twoSourceCase is one way the two devices' clocks and links differ.
type twoSourceCase struct {
	name string
	// ampEvery and pitotEvery keep every n-th simulator sample (100 Hz)
	// for the amplifier and the pitot node (2: 50 Hz).
	ampEvery, pitotEvery int
	// device clocks (µs at the first sample) and minimum link delays
	ampT0Us, pitotT0Us   int64
	ampDelay, pitotDelay time.Duration
}

var twoSourceCases = []twoSourceCase{
	// The issue 15 report: amplifier from power-up at 3600 s, pitot node at
	// 777 s, the node slower and on Wi-Fi.
	{"pitot 50 Hz over Wi-Fi", 1, 2, 3600_000_000, 777_000_000, time.Millisecond, 8 * time.Millisecond},
	// Same rate, pitot clock on Unix time but 2.3 s off and 3 ms out of
	// phase with the amplifier's samples.
	{"pitot 100 Hz, Unix clock off by 2.3 s", 1, 1, 120_000_000, 0, 2 * time.Millisecond, 25 * time.Millisecond},
	// The pitot faster than the balance: the export reads it at the
	// balance samples' instants, between its two readings there.
	{"balance 50 Hz, pitot 100 Hz", 2, 1, 60_000_000, 5_000_000, 3 * time.Millisecond, 4 * time.Millisecond},
}

// recordTwoSources builds the stored run of the two-source rig through the
// real path (process.Recorder via recordOffline, the store's writer): the
// seeded tow-tank simulator's samples split between the amplifier and the
// pitot node, each on its own device clock, each block received after its
// last sample plus the link's delay and a random queueing delay; blocks
// reach the recorder in receive order, as live. It returns the store path
// and the run id.
func recordTwoSources(t *testing.T, c twoSourceCase, rigText string) (string, uint64) {
	t.Helper()
	r, err := rig.Parse("two.toml", []byte(rigText))
	require.NoError(t, err)
	s := towtankSim(t)
	start := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	pitotT0 := c.pitotT0Us
	if pitotT0 == 0 {
		pitotT0 = start.Add(-2300*time.Millisecond).UnixMicro() + 3000
	}
	rng := rand.New(rand.NewPCG(15, 15))
	var blocks acquire.Blocks
	for range importBlocks {
		b := s.Next()
		elapsed := b.T0Us - start.UnixMicro() // true time of sample 0 since start
		amp := acquire.Block{Source: "amp", Seq: b.Seq, T0Us: c.ampT0Us + elapsed, DtUs: b.DtUs * int64(c.ampEvery)}
		pit := acquire.Block{Source: "pitotnode", Seq: b.Seq, T0Us: pitotT0 + elapsed, DtUs: b.DtUs * int64(c.pitotEvery)}
		every := func(raw []float64, n int) []float64 {
			var v []float64
			for i := 0; i < len(raw); i += n {
				v = append(v, raw[i])
			}
			return v
		}
		for _, sr := range b.Series {
			if sr.Channel != "pitot" {
				amp.Series = append(amp.Series, acquire.Series{Channel: sr.Channel, Raw: every(sr.Raw, c.ampEvery)})
				continue
			}
			pit.Series = []acquire.Series{{Channel: "pitot", Raw: every(sr.Raw, c.pitotEvery)}}
		}
		lastTrue := func(bl acquire.Block) time.Time {
			return start.Add(time.Duration(elapsed+int64(bl.Len()-1)*bl.DtUs) * time.Microsecond)
		}
		jitter := func() time.Duration { return time.Duration(rng.ExpFloat64() * float64(2*time.Millisecond)) }
		amp.Received = lastTrue(amp).Add(c.ampDelay + jitter())
		pit.Received = lastTrue(pit).Add(c.pitotDelay + jitter())
		blocks = append(blocks, amp, pit)
	}
	slices.SortStableFunc(blocks, func(a, b acquire.Block) int { return a.Received.Compare(b.Received) })
	db := filepath.Join(t.TempDir(), "recorded.db")
	store, err := storage.Open(db, storage.Options{})
	require.NoError(t, err)
	var h acquire.Health
	id, _, err := recordOffline(t.Context(), store, r, rigText, "two sources", blocks, &h, "amp", newLogger(io.Discard, false), 0)
	require.NoError(t, err)
	require.NoError(t, store.Close())
	return db, id
}

// Ensure the issue 15 "must show" for export: a run of a serial delimited
// amplifier and an MQTT pitot with clocks far apart, exported with
// `export --what raw`, imports without --source and gives the same
// segments (C_L within 0.1 U95 of the recorded run's); exporting the
// imported run gives the same file byte for byte (so every reading's
// float64 bits); and every pitot cell is a pitot reading as recorded.
func TestExportRaw_TwoSourcesImportGivesSameSegments(t *testing.T) {
	rigText := twoSourceRigTOML(t)
	rigFile := filepath.Join(t.TempDir(), "two.toml")
	require.NoError(t, os.WriteFile(rigFile, []byte(rigText), 0o644))
	for _, c := range twoSourceCases {
		t.Run(c.name, func(t *testing.T) {
			db, id := recordTwoSources(t, c, rigText)
			recorded := exportRows(t, db, strconv.FormatUint(id, 10))
			require.Len(t, recorded, len(importStep), "the recorded run has a segment per angle step")

			raw := filepath.Join(t.TempDir(), "two.csv")
			code, _, errOut := runCLI(t, "export", "--db", db, "--run", "latest", "--what", "raw", "--out", raw)
			require.Equal(t, 0, code, errOut)
			first, err := os.ReadFile(raw)
			require.NoError(t, err)
			head, _, _ := strings.Cut(string(first), "\n")
			require.Equal(t, "t_s,amp/n_fore,amp/n_aft,amp/a_main,amp/alpha,amp/t_water,pitotnode/pitot", head)

			db2 := filepath.Join(t.TempDir(), "imported.db")
			code, _, errOut = runCLI(t, "import", "--rig", rigFile, "--db", db2, raw)
			require.Equal(t, 0, code, errOut)
			// The progress counts the file's rows once, not once per source.
			m := regexp.MustCompile(`import: ([0-9 ]+) of ([0-9 ]+) rows \(100 %\)`).FindStringSubmatch(errOut)
			if assert.NotNil(t, m, "final progress line: %s", errOut) {
				assert.Equal(t, m[2], m[1], "rows done and rows in the file")
			}
			imported := exportRows(t, db2, "latest")
			require.Len(t, imported, len(recorded))
			for i := range recorded {
				cl, u95 := recorded[i]["cl"].(float64), recorded[i]["cl_u95"].(float64)
				got := imported[i]["cl"].(float64)
				t.Logf("segment %d: C_L recorded %.5f ± %.5f, imported %.5f (Δ %.2f U95)", i, cl, u95, got, math.Abs(got-cl)/u95)
				if math.Abs(got-cl) > 0.1*u95 {
					t.Errorf("segment %d: C_L %.5f after import, %.5f ± %.5f recorded: more than 0.1 U95 apart", i, got, cl, u95)
				}
				// Live, the first amplifier block can be processed before the
				// pitot's first block arrives (the first tick then has no q
				// and the first segment starts a tick later); the export has
				// the pitot there. Otherwise the times are the same.
				t0, err := time.Parse(time.RFC3339Nano, recorded[i]["t_start"].(string))
				require.NoError(t, err)
				t1, err := time.Parse(time.RFC3339Nano, imported[i]["t_start"].(string))
				require.NoError(t, err)
				if d := t1.Sub(t0).Abs(); d > 100*time.Millisecond || (i > 0 && d != 0) {
					t.Errorf("segment %d starts at %s after import, %s recorded", i, t1, t0)
				}
			}

			// Export → import → export is exact.
			again := filepath.Join(t.TempDir(), "again.csv")
			code, _, errOut = runCLI(t, "export", "--db", db2, "--run", "latest", "--what", "raw", "--out", again)
			require.Equal(t, 0, code, errOut)
			second, err := os.ReadFile(again)
			require.NoError(t, err)
			require.True(t, bytes.Equal(first, second), "the re-export differs from the export")

			// Each pitot cell is the pitot as the estimator joined it: it
			// lies between two consecutive recorded readings, in order.
			var readings []float64
			store, err := storage.Open(db, storage.Options{ReadOnly: true})
			require.NoError(t, err)
			defer store.Close()
			require.NoError(t, store.RawBlocks(id, func(b acquire.Block) error {
				readings = append(readings, b.Raw("pitot")...)
				return nil
			}))
			recs, err := csv.NewReader(bytes.NewReader(first)).ReadAll()
			require.NoError(t, err)
			filled, k := 0, 0
			for _, rec := range recs[1:] {
				if rec[6] == "" {
					continue
				}
				v, err := strconv.ParseFloat(rec[6], 64)
				require.NoError(t, err)
				for k < len(readings) && v != readings[k] &&
					(k+1 == len(readings) || v < min(readings[k], readings[k+1]) || v > max(readings[k], readings[k+1])) {
					k++
				}
				require.Less(t, k, len(readings), "pitot cell %s (row %s) is not between consecutive recorded readings", rec[6], rec[0])
				filled++
			}
			t.Logf("%d rows, %d with a pitot value", len(recs)-1, filled)
			require.Equal(t, importBlocks*10/c.ampEvery, len(recs)-1, "one row per amplifier sample")
			require.Greater(t, filled, (len(recs)-1)*9/10, "the pitot is blank only at the ends of the run")
		})
	}
}

// Ensure that a one-source run on a device clock counting from power-up
// exports with t_s in UTC (the aligned timeline), imports, and exports
// again identically; the stored readings of the imported run have the
// recorded float64 bits, in order.
func TestExportRaw_OneSourceRoundTripIsExact(t *testing.T) {
	s := towtankSim(t)
	start := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	db := filepath.Join(t.TempDir(), "one.db")
	store, err := storage.Open(db, storage.Options{})
	require.NoError(t, err)
	text, err := os.ReadFile(towtankRig)
	require.NoError(t, err)
	id, err := store.CreateRun(storage.Run{Rig: "foil-towtank", RigTOML: string(text), Started: start})
	require.NoError(t, err)
	w := store.NewWriter(id, storage.WriterConfig{})
	in := make(chan storage.Item, importBlocks)
	for range importBlocks {
		b := s.Next()
		b.Received = time.UnixMicro(b.T0Us + int64(b.Len()-1)*b.DtUs).Add(time.Millisecond).UTC()
		b.T0Us = b.T0Us - start.UnixMicro() + 3600_000_000 // from power-up
		in <- storage.Item{Block: &b}
	}
	close(in)
	require.NoError(t, w.Run(t.Context(), in))
	require.NoError(t, store.Close())

	out1 := filepath.Join(t.TempDir(), "one.csv")
	code, _, errOut := runCLI(t, "export", "--db", db, "--what", "raw", "--out", out1)
	require.Equal(t, 0, code, errOut)
	first, err := os.ReadFile(out1)
	require.NoError(t, err)
	require.True(t, strings.HasPrefix(string(first), "t_s,n_fore,n_aft,a_main,pitot,alpha,t_water\n1773478800.001000,"),
		"one source keeps plain channel names; t_s is UTC (09:00:00 plus the 1 ms link delay): %.80s", first)

	db2 := filepath.Join(t.TempDir(), "one-imported.db")
	code, _, errOut = runCLI(t, "import", "--rig", towtankRig, "--db", db2, out1)
	require.Equal(t, 0, code, errOut)
	out2 := filepath.Join(t.TempDir(), "again.csv")
	code, _, errOut = runCLI(t, "export", "--db", db2, "--what", "raw", "--out", out2)
	require.Equal(t, 0, code, errOut)
	second, err := os.ReadFile(out2)
	require.NoError(t, err)
	require.True(t, bytes.Equal(first, second), "the re-export differs from the export")

	bits := func(path string) map[string][]uint64 {
		st, err := storage.Open(path, storage.Options{ReadOnly: true})
		require.NoError(t, err)
		defer st.Close()
		out := map[string][]uint64{}
		require.NoError(t, st.RawBlocks(1, func(b acquire.Block) error {
			for _, sr := range b.Series {
				for _, v := range sr.Raw {
					out[sr.Channel] = append(out[sr.Channel], math.Float64bits(v))
				}
			}
			return nil
		}))
		return out
	}
	want, got := bits(db), bits(db2)
	require.Len(t, got, len(want))
	for ch, w := range want {
		require.Equal(t, w, got[ch], "channel %s: stored readings differ after the round trip", ch)
	}
}

// Ensure that a raw CSV written by the export before the aligned timeline
// (device clock from power-up and a "# start" line, checked into testdata)
// still imports and gives the simulator's C_L within U95 at every step.
func TestImport_FileFromBeforeAlignedExport(t *testing.T) {
	old := filepath.Join("..", "..", "testdata", "import", "foil-towtank-raw-v1-relative.csv")
	foil := towtankSim(t).Foil()
	db := filepath.Join(t.TempDir(), "old.db")
	code, _, errOut := runCLI(t, "import", "--rig", towtankRig, "--db", db, old)
	require.Equal(t, 0, code, errOut)
	rows := exportRows(t, db, "latest")
	require.Len(t, rows, len(importStep))
	for i, row := range rows {
		truth, _ := foil.Truth(rig.Rad(importStep[i]))
		cl, u95 := row["cl"].(float64), row["cl_u95"].(float64)
		if math.Abs(cl-truth) > u95 {
			t.Errorf("step %g°: cl %.4f ± %.4f misses truth %.4f", importStep[i], cl, u95, truth)
		}
	}
	require.True(t, strings.HasPrefix(rows[0]["t_start"].(string), "2026-03-14T09:00:0"), "segment times from the file's # start line: %v", rows[0]["t_start"])
}

// Ensure that a multi-source file naming a source the rig does not have is
// refused with the rig's sources listed.
func TestImport_UnknownSourceColumn(t *testing.T) {
	bad := filepath.Join(t.TempDir(), "bad.csv")
	require.NoError(t, os.WriteFile(bad, []byte("t_s,carriage/n_fore,mast/pitot\n1773478800,1,2\n1773478800.01,1,2\n"), 0o644))
	code, _, errOut := runCLI(t, "import", "--rig", towtankRig, "--db", filepath.Join(t.TempDir(), "x.db"), bad)
	require.Equal(t, 2, code)
	require.Contains(t, errOut, `column "mast/pitot" names source "mast", which is not a [[source]] of rig "foil-towtank" (its sources: carriage)`)
}

package main

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"math"
	"math/rand/v2"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/serial"
	"liftyard/acquire/sim"
	"liftyard/calibrate"
	"liftyard/estimate"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// calOut is the --json output as a test reads it.
type calOut struct {
	ID                string    `json:"id"`
	Channel           string    `json:"channel"`
	Poly              []float64 `json:"poly"`
	PolyU             []float64 `json:"poly_u"`
	ResidualSD        float64   `json:"residual_sd"`
	NonlinearityPctFS float64   `json:"nonlinearity_pct_fs"`
	HysteresisPctFS   float64   `json:"hysteresis_pct_fs"`
	Unit              string    `json:"unit"`
	Order             int       `json:"order"`
	Dof               int       `json:"dof"`
	Warnings          []string  `json:"warnings"`
}

// relErr is |got − want|/|want|; NIST's log relative error is −log10 of it.
func relErr(got, want float64) float64 { return math.Abs(got-want) / math.Abs(want) }

// Ensure that `liftyard calibrate --points --json` reproduces the NIST StRD
// certified values (issue 5, "must show"): coefficients to at least 9
// significant digits, their standard deviations and the residual SD to 6.
func TestCalibrate_NISTCertified(t *testing.T) {
	// Certified values: NIST/ITL StRD linear least squares, Norris.dat and
	// Pontius.dat (https://www.itl.nist.gov/div898/strd/lls/lls.shtml),
	// as listed in docs/references.md §5.1 and §5.2. NIST's y is
	// our applied value, its x our reading.
	tests := []struct {
		name   string
		file   string
		order  int
		poly   []float64
		polyU  []float64
		resSD  float64
		dof    int
		digits float64 // significant digits required of the coefficients
	}{
		{
			name: "NIST StRD Norris, linear", file: "norris.csv", order: 1,
			poly:  []float64{-0.262323073774029, 1.00211681802045},
			polyU: []float64{0.232818234301152, 0.429796848199937e-3},
			resSD: 0.884796396144373, dof: 34, digits: 9,
		},
		{
			name: "NIST StRD Pontius, quadratic", file: "pontius.csv", order: 2,
			poly:  []float64{0.673565789473684e-3, 0.732059160401003e-6, -0.316081871345029e-14},
			polyU: []float64{0.107938612033077e-3, 0.157817399981659e-9, 0.486652849992036e-16},
			resSD: 0.205177424076185e-3, dof: 37, digits: 9,
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			db := filepath.Join(t.TempDir(), "cal.db")
			code, stdout, stderr := runCLI(t, "calibrate", "--channel", "nist", "--points", "../../testdata/calibration/"+tt.file,
				"--order", itoa(tt.order), "--db", db, "--json")
			require.Equal(t, 0, code, stderr)
			var got calOut
			require.NoError(t, json.Unmarshal([]byte(stdout), &got), stdout)
			require.Len(t, got.Poly, tt.order+1)
			require.Len(t, got.PolyU, tt.order+1)
			for k := range tt.poly {
				assert.Less(t, relErr(got.Poly[k], tt.poly[k]), math.Pow(10, -tt.digits), "B%d = %.15g, certified %.15g", k, got.Poly[k], tt.poly[k])
				assert.Less(t, relErr(got.PolyU[k], tt.polyU[k]), 1e-6, "s(B%d) = %.15g, certified %.15g", k, got.PolyU[k], tt.polyU[k])
			}
			assert.Less(t, relErr(got.ResidualSD, tt.resSD), 1e-6, "residual SD %.15g, certified %.15g", got.ResidualSD, tt.resSD)
			assert.Equal(t, tt.dof, got.Dof)
			assert.Equal(t, "nist", got.Channel)
			assert.Regexp(t, `^nist-\d{8}-1$`, got.ID)

			// The JSON carries every digit: the stored record holds the
			// same float64 values bit for bit.
			st, err := storage.Open(db, storage.Options{ReadOnly: true})
			require.NoError(t, err)
			defer st.Close()
			rec, err := st.Calibration(got.ID)
			require.NoError(t, err)
			assert.Equal(t, rec.Fit.Poly, got.Poly)
			assert.Equal(t, rec.Fit.PolyU, got.PolyU)
			assert.Equal(t, rec.Fit.ResidualSD, got.ResidualSD)
			assert.Len(t, rec.Points, map[string]int{"norris.csv": 36, "pontius.csv": 40}[tt.file])
		})
	}
}

func itoa(i int) string { return string(rune('0' + i)) }

// Ensure that the readable summary names the id, the coefficients with
// their uncertainties, the characteristics and the rig-file line, and that
// a second calibration of the same channel the same day gets the next id.
func TestCalibrate_Summary(t *testing.T) {
	db := filepath.Join(t.TempDir(), "cal.db")
	args := []string{"calibrate", "--channel", "n_fore", "--points", "../../testdata/calibration/fore-cell.csv", "--order", "2",
		"--db", db, "--unit", "N", "--who", "R. Tan", "--reference", "M1 dead weights", "--reference-u", "0.004", "--valid-days", "30"}
	code, out, stderr := runCLI(t, args...)
	require.Equal(t, 0, code, stderr)
	id := regexp.MustCompile(`Calibration (n_fore-\d{8}-1) of channel n_fore`).FindStringSubmatch(out)
	require.NotNil(t, id, out)
	for _, want := range []string{"9 (5 loading, 4 unloading)", "u(c2) =", "residual SD", "% FS", "M1 dead weights", "R. Tan",
		"calibration = { id = \"" + id[1] + "\" }", "up", "down"} {
		assert.Contains(t, out, want)
	}
	code, out, stderr = runCLI(t, args...)
	require.Equal(t, 0, code, stderr)
	assert.Contains(t, out, strings.TrimSuffix(id[1], "1")+"2")

	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	recs, err := st.Calibrations("n_fore")
	require.NoError(t, err)
	require.Len(t, recs, 2)
	r := recs[1]
	assert.Equal(t, "N", r.Unit)
	assert.Equal(t, 0.004, r.ReferenceU)
	assert.Equal(t, "R. Tan", r.Who)
	assert.InDelta(t, 30*24, r.ValidUntil.Sub(r.Created).Hours(), 1)
}

// Ensure that bad usage and bad input files exit with status 2 and say what
// to fix, with the line of a bad points file; a store held by another
// process exits 1.
func TestCalibrate_BadInput(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "points.csv")
	require.NoError(t, os.WriteFile(bad, []byte("applied,reading\n0,1\n10,2\n20,3\n30,4\n40,5\n50,12x\n"), 0o600))
	flat := filepath.Join(dir, "flat.csv")
	require.NoError(t, os.WriteFile(flat, []byte("applied,reading\n0,5\n10,5\n20,5\n"), 0o600))
	db := filepath.Join(dir, "cal.db")
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"no channel", []string{"--points", bad}, "--channel is required"},
		{"no source of points", []string{"--channel", "x"}, "give --points FILE.csv, or --interactive"},
		{"both", []string{"--channel", "x", "--points", bad, "--interactive"}, "not both"},
		{"order 4", []string{"--channel", "x", "--points", bad, "--order", "4"}, "--order 4: use 1 to 3"},
		{"negative reference u", []string{"--channel", "x", "--points", bad, "--reference-u", "-1"}, "--reference-u must be"},
		{"missing file", []string{"--channel", "x", "--points", filepath.Join(dir, "nope.csv")}, "no such file"},
		{"bad number, with its line", []string{"--channel", "x", "--points", bad, "--db", db}, bad + `:7: reading "12x" is not a number`},
		{"readings that do not vary", []string{"--channel", "x", "--points", flat, "--db", db}, "calibration points cannot be fitted"},
		{"interactive without rig", []string{"--channel", "x", "--interactive", "--steps", "0,1,2"}, "--interactive needs --rig"},
		{"unknown flag", []string{"--channel", "x", "--pionts", bad}, "unknown flag --pionts"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			code, _, stderr := runCLI(t, append([]string{"calibrate"}, tt.args...)...)
			assert.Equal(t, 2, code)
			assert.Contains(t, stderr, tt.want)
		})
	}
	_, err := os.Stat(db)
	assert.True(t, os.IsNotExist(err), "no store is created for a bad points file")

	held, err := storage.Open(db, storage.Options{})
	require.NoError(t, err)
	defer held.Close()
	code, _, stderr := runCLI(t, "calibrate", "--channel", "n_fore", "--points", "../../testdata/calibration/pitot.csv", "--db", db)
	assert.Equal(t, 1, code)
	assert.Contains(t, stderr, "in use by another running liftyard")
}

// promptWatcher is stdout for an interactive session: it keeps the text and
// signals each "apply" prompt.
type promptWatcher struct {
	mu      sync.Mutex
	buf     bytes.Buffer
	prompts chan string
}

func (w *promptWatcher) Write(p []byte) (int, error) {
	w.mu.Lock()
	defer w.mu.Unlock()
	w.buf.Write(p)
	for _, line := range strings.Split(string(p), "\n") {
		if strings.Contains(line, "] apply ") {
			w.prompts <- line
		}
	}
	return len(p), nil
}

func (w *promptWatcher) String() string {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.buf.String()
}

// Ensure that interactive calibration works end to end at a rig: frames
// from a device on a real pseudo-terminal, read through the rig's serial
// source, a scripted operator who loads and unloads the cell and presses
// Enter at each prompt, and a stored record whose fit recovers the
// device's known calibration (the example rig's n_fore polynomial, value =
// −12.5 N + 0.0025 N·reading) within its uncertainty.
func TestCalibrate_InteractiveSerial(t *testing.T) {
	master, port, err := serial.OpenPTY()
	require.NoError(t, err)
	t.Cleanup(func() { master.Close() })
	text, err := os.ReadFile("../../testdata/rigs/foil-towtank.toml")
	require.NoError(t, err)
	src := "[[source]]\nname = \"bench\"\ntype = \"serial\"\nport = \"" + port + "\"\nbaud = 115200\nformat = \"frame\"\nchannels = [\"n_fore\"]\n\n"
	toml := regexp.MustCompile(`(?s)\[\[source\]\].*?\n# Channels\.`).ReplaceAllString(string(text), src+"# Channels.")
	rigPath := filepath.Join(t.TempDir(), "bench.toml")
	require.NoError(t, os.WriteFile(rigPath, []byte(toml), 0o600))
	r, err := rig.Parse(rigPath, []byte(toml))
	require.NoError(t, err)
	ch, _ := r.Channel("n_fore")
	c0, c1 := ch.Calibration.Poly[0], ch.Calibration.Poly[1]

	// The device: a frame every 5 ms, the reading of the load now applied
	// plus noise of 3 counts (invented).
	var appliedBits atomic.Uint64
	ctx, cancel := context.WithCancel(t.Context())
	defer cancel()
	var dev sync.WaitGroup
	dev.Go(func() {
		rng := rand.New(rand.NewPCG(5, 5))
		tick := time.NewTicker(5 * time.Millisecond)
		defer tick.Stop()
		f := acquire.Frame{Values: make([]float64, 1)}
		for seq := uint32(0); ; seq++ {
			select {
			case <-ctx.Done():
				return
			case <-tick.C:
			}
			applied := math.Float64frombits(appliedBits.Load())
			f.Seq, f.TUs = seq, int64(seq)*5000
			f.Values[0] = math.Round((applied-c0)/c1 + 3*rng.NormFloat64())
			if _, err := master.Write(acquire.AppendFrame(nil, &f)); err != nil {
				return
			}
		}
	})

	steps := []float64{0, 50, 100, 150, 100, 50, 0}
	stdinR, stdinW := io.Pipe()
	out := &promptWatcher{prompts: make(chan string, len(steps)+1)}
	var operator sync.WaitGroup
	operator.Go(func() {
		defer stdinW.Close()
		for _, load := range steps {
			select {
			case <-ctx.Done():
				return
			case <-out.prompts:
			}
			appliedBits.Store(math.Float64bits(load))
			// As a person would, wait a moment with the load on before
			// pressing Enter, so frames read late on a busy machine were
			// already taken at this load.
			select {
			case <-ctx.Done():
				return
			case <-time.After(250 * time.Millisecond):
			}
			if _, err := io.WriteString(stdinW, "\n"); err != nil {
				return
			}
		}
	})

	db := filepath.Join(t.TempDir(), "cal.db")
	var errb bytes.Buffer
	err = calibrateMain(ctx, []string{"--channel", "n_fore", "--interactive", "--rig", rigPath, "--steps", "0,50,100,150,100,50,0",
		"--settle", "150ms", "--average", "300ms", "--db", db, "--json", "--reference-u", "0.01"}, stdinR, out, &errb)
	require.NoError(t, err, "stderr: %s\nstdout: %s", errb.String(), out.String())
	cancel()
	stdinR.Close()
	operator.Wait()
	dev.Wait()

	text2 := out.String()
	if os.Getenv("SHOW") != "" {
		t.Log(text2)
	}
	assert.Contains(t, text2, "[1/7] apply 0 N (load), then press Enter")
	assert.Contains(t, text2, "[5/7] apply 100 N (unload), then press Enter")
	assert.Contains(t, text2, "sensitivity so far")
	assert.Contains(t, text2, "fit so far (order 1, 3 points)")

	st, err := storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	recs, err := st.Calibrations("n_fore")
	require.NoError(t, err)
	require.Len(t, recs, 1)
	rec := recs[0]
	require.Len(t, rec.Points, len(steps))
	wantDir := []calibrate.Direction{"up", "up", "up", "up", "down", "down", "down"}
	for i, p := range rec.Points {
		assert.Equal(t, steps[i], p.Applied)
		assert.Equal(t, wantDir[i], p.Direction, "point %d", i)
		// each captured mean is near the device's reading for the load
		assert.InDelta(t, (steps[i]-c0)/c1, p.Reading, 5, "point %d", i)
	}
	f := rec.Fit
	require.Len(t, f.Poly, 2)
	assert.InDelta(t, c0, f.Poly[0], 4*f.PolyU[0]+1e-9, "c0 %g ± %g", f.Poly[0], f.PolyU[0])
	assert.InDelta(t, c1, f.Poly[1], 4*f.PolyU[1]+1e-15, "c1 %g ± %g", f.Poly[1], f.PolyU[1])
	assert.Less(t, f.PolyU[1]/c1, 1e-4, "the fit is tight: 3 counts of noise on 60 000 counts")
}

// Ensure that a record run resolves a stored calibration named in the rig
// file, stores which calibrations the run used, and logs an event (and
// still records) when the calibration has expired.
func TestRecord_StoredCalibrationExpired(t *testing.T) {
	text, err := os.ReadFile("../../testdata/rigs/foil-towtank.toml")
	require.NoError(t, err)
	inline, err := rig.Parse("foil.toml", text)
	require.NoError(t, err)
	toml := strings.Replace(string(text), "calibration = { poly = [-12.5, 0.0025], u = 0.15 }", `calibration = { id = "n_fore-cert-4711" }`, 1)
	require.NotEqual(t, string(text), toml)
	r, err := rig.Parse("foil-stored.toml", []byte(toml))
	require.NoError(t, err)

	db := filepath.Join(t.TempDir(), "rec.db")
	st, err := storage.Open(db, storage.Options{})
	require.NoError(t, err)
	made := time.Now().AddDate(-2, 0, 0)
	_, err = st.PutCalibration(calibrate.Record{ID: "n_fore-cert-4711", Channel: "n_fore", Unit: "N", Created: made,
		ValidUntil: made.AddDate(1, 0, 0), Fit: calibrate.Fit{Order: 1, Poly: []float64{-12.5, 0.0025}, PolyU: []float64{0.01, 1e-7},
			Cov: [][]float64{{1e-4, 0}, {0, 1e-14}}, Dof: 5},
		Points: []calibrate.Point{{Applied: 0, Reading: 5000}, {Applied: 500, Reading: 205000}}})
	require.NoError(t, err)
	require.NoError(t, st.Close())

	// The simulator speaks for the carriage with the inline calibration,
	// so the raw readings are those of the stored one too.
	fluid, err := estimate.Properties(inline.Fluid, inline.Conditions)
	require.NoError(t, err)
	s, err := sim.New(inline, sim.Config{QPa: estimate.DynamicPressure(fluid.RhoKgPerM3, 2), Seed: 3}, fluid.RhoKgPerM3)
	require.NoError(t, err)
	var logs bytes.Buffer
	ctx, cancel := context.WithTimeout(t.Context(), 6*time.Second)
	defer cancel()
	liveWarned := make(chan bool, 1)
	m := &Main{Rig: r, RigTOML: toml, DBPath: db, Addr: "127.0.0.1:0", Logger: newLogger(&logs, false),
		Sources: []Source{{Name: "carriage", Src: s, Health: &s.Health}}}
	m.OnReady = func(url string, _ uint64) {
		// The live estimate on the dashboard carries the warning too.
		go func() {
			defer cancel()
			for ctx.Err() == nil {
				resp, err := http.Get(url + "/api/v1/live")
				if err == nil {
					var l struct {
						Warnings []string `json:"warnings"`
					}
					ok := resp.StatusCode == 200 && json.NewDecoder(resp.Body).Decode(&l) == nil
					resp.Body.Close()
					if ok {
						liveWarned <- strings.Contains(strings.Join(l.Warnings, "\n"), "calibration n_fore-cert-4711 expired")
						return
					}
				}
				time.Sleep(50 * time.Millisecond)
			}
			liveWarned <- false
		}()
	}
	require.NoError(t, m.Run(ctx))
	assert.True(t, <-liveWarned, "the live estimate warns about the expired calibration")

	st, err = storage.Open(db, storage.Options{ReadOnly: true})
	require.NoError(t, err)
	defer st.Close()
	ids, err := st.RunCalibrations(m.RunID())
	require.NoError(t, err)
	assert.Equal(t, []string{"n_fore-cert-4711"}, ids)
	evs, err := st.Events(m.RunID())
	require.NoError(t, err)
	var found bool
	for _, ev := range evs {
		if ev.Kind == string(process.EventCalibrationExpired) {
			found = true
			assert.Contains(t, ev.Message, "calibration n_fore-cert-4711 expired on "+made.AddDate(1, 0, 0).Format("2006-01-02"))
		}
	}
	assert.True(t, found, "expired-calibration event stored: %+v", evs)
	assert.Contains(t, logs.String(), "n_fore-cert-4711 expired")
	run, err := st.Run(m.RunID())
	require.NoError(t, err)
	assert.Greater(t, run.Samples, uint64(0), "the run still records")

	// A rig naming an id the store does not hold fails before recording,
	// naming the id.
	bad := strings.Replace(toml, "n_fore-cert-4711", "n_fore-nope", 1)
	rb, err := rig.Parse("bad.toml", []byte(bad))
	require.NoError(t, err)
	st.Close()
	m2 := &Main{Rig: rb, RigTOML: bad, DBPath: db, Addr: "127.0.0.1:0", Sources: []Source{{Name: "carriage", Src: s, Health: &s.Health}}}
	err = m2.Run(t.Context())
	require.Error(t, err)
	assert.Contains(t, err.Error(), `stored calibration "n_fore-nope": calibration "n_fore-nope": not found`)
}

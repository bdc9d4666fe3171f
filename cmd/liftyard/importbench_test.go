package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"liftyard/acquire/sim"
	"liftyard/estimate"
	"liftyard/rig"
)

// The import benchmark's record (docs/performance.md "Import against a
// script"): a foil on a tow rig with 11 spare strain channels, 16 channels
// at 1 kHz, 1 000 000 rows. An invented scenario, seeded.
const (
	benchRows   = 1_000_000
	benchRateHz = 1000
	benchSpares = 11
)

// benchRigTOML is the foil rig of the benchmark: the tow-tank foil's five
// lift channels (the water temperature fixed) and 11 spare strain bridges
// calibrated to newtons that no result uses, as a rig carries between
// tests.
func benchRigTOML() string {
	var b strings.Builder
	b.WriteString(`name = "foil-bench"
kind = "foil"
fluid = "fresh_water"

[conditions]
temperature_c = 15.0

[reference]
area_m2   = 0.09
area_u_m2 = 0.0003
area_kind = "planform"
length_m  = 0.15
span_m    = 0.60

[[source]]
name   = "carriage"
type   = "mqtt"
broker = "tcp://127.0.0.1:1883"
topic  = "liftyard/bench/raw"

[[channel]]
name = "n_fore"
quantity = "force"
unit = "N"
capacity = "500 N"
calibration = { poly = [-12.5, 0.0025], u = 0.15 }

[[channel]]
name = "n_aft"
quantity = "force"
unit = "N"
capacity = "500 N"
calibration = { poly = [-9.8, 0.00251], u = 0.15 }

[[channel]]
name = "a_main"
quantity = "force"
unit = "N"
capacity = "100 N"
calibration = { poly = [-2.04, 0.0005], u = 0.04 }

[[channel]]
name = "pitot"
quantity = "pressure"
unit = "Pa"
capacity = "5 kPa"
calibration = { poly = [-3.1, 0.00061], u = 2.5 }

[[channel]]
name = "alpha"
quantity = "angle"
unit = "deg"
calibration = { poly = [-180.0, 0.087890625], u = 0.05 }
`)
	for i := 1; i <= benchSpares; i++ {
		fmt.Fprintf(&b, `
[[channel]]
name = "strain_%02d"
quantity = "force"
unit = "N"
capacity = "200 N"
calibration = { poly = [%g, %g], u = 0.1 }
`, i, -1.5-0.1*float64(i), 0.0012+0.00001*float64(i))
	}
	b.WriteString(`
[lift]
normal = ["n_fore", "n_aft"]
axial = ["a_main"]
angle = "alpha"
angle_u_deg = 0.05
dynamic_pressure = "pitot"
`)
	return b.String()
}

// benchRecord is the benchmark's raw CSV and rig file, written into dir:
// rows rows of the simulated foil swept up and down through −4° … 12° at
// 1 kHz (the simulator's readings as it gives them) and the spare
// channels' 24-bit counts (an AR(1) drift plus noise, whole counts). It
// also writes the linear calibration of every channel (CAL.json) for the
// script.
func benchRecord(tb testing.TB, dir string, rows int) (rigPath, csvPath, calPath string) {
	tb.Helper()
	rigPath = filepath.Join(dir, "foil-bench.toml")
	if err := os.WriteFile(rigPath, []byte(benchRigTOML()), 0o644); err != nil {
		tb.Fatal(err)
	}
	r, err := rig.Load(rigPath)
	if err != nil {
		tb.Fatal(err)
	}
	cal := map[string][2]float64{}
	for _, c := range r.Channels {
		p := c.Calibration.Poly
		cal[c.Name] = [2]float64{p[0], p[1]}
	}
	calJSON, _ := json.Marshal(cal)
	calPath = filepath.Join(dir, "cal.json")
	if err := os.WriteFile(calPath, calJSON, 0o644); err != nil {
		tb.Fatal(err)
	}
	fl, err := estimate.Properties(r.Fluid, r.Conditions)
	if err != nil {
		tb.Fatal(err)
	}
	s, err := sim.New(r, sim.Config{
		QPa: estimate.DynamicPressure(fl.RhoKgPerM3, 1.5), Seed: 14, RateHz: benchRateHz, BlockSamples: 100,
		StepsDeg: []float64{-4, -2, 0, 2, 4, 6, 8, 10, 12}, Hold: 4 * time.Second, Move: time.Second,
		Start: time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC),
	}, fl.RhoKgPerM3)
	if err != nil {
		tb.Fatal(err)
	}
	csvPath = filepath.Join(dir, "foil-bench-raw.csv")
	f, err := os.Create(csvPath)
	if err != nil {
		tb.Fatal(err)
	}
	defer f.Close()
	w := bufio.NewWriterSize(f, 1<<20)
	rng := rand.New(rand.NewPCG(14, 0x5ba2e))
	spare := make([]float64, benchSpares)
	for i := range spare {
		spare[i] = 1200 + 37*float64(i)
	}
	prev := s.Preview()
	w.WriteString("t_s")
	for _, ser := range prev.Series {
		w.WriteString("," + ser.Channel)
	}
	for i := 1; i <= benchSpares; i++ {
		fmt.Fprintf(w, ",strain_%02d", i)
	}
	w.WriteString("\n")
	var line []byte
	for done := 0; done < rows; {
		b := s.Next()
		for i := 0; i < b.Len() && done < rows; i++ {
			t := b.T0Us + int64(i)*b.DtUs
			line = strconv.AppendInt(line[:0], t/1e6, 10)
			line = append(line, '.')
			line = append(line, fmt.Sprintf("%06d", t%1e6)...)
			for _, ser := range b.Series {
				line = append(line, ',')
				line = strconv.AppendFloat(line, ser.Raw[i], 'g', -1, 64)
			}
			for k := range spare {
				spare[k] = 0.999*spare[k] + 0.001*(1200+37*float64(k)) + rng.NormFloat64()
				line = append(line, ',')
				line = strconv.AppendFloat(line, math.Round(spare[k]+8*rng.NormFloat64()), 'f', -1, 64)
			}
			line = append(line, '\n')
			w.Write(line)
			done++
		}
	}
	if err := w.Flush(); err != nil {
		tb.Fatal(err)
	}
	return rigPath, csvPath, calPath
}

// timed runs cmd and returns its wall time, peak resident memory (MB) and
// processor time (user + system, s).
func timed(tb testing.TB, cmd *exec.Cmd) (time.Duration, float64, float64) {
	tb.Helper()
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	t0 := time.Now()
	if err := cmd.Run(); err != nil {
		tb.Fatalf("%s: %v\n%s", strings.Join(cmd.Args, " "), err, stderr.String())
	}
	wall := time.Since(t0)
	ru := cmd.ProcessState.SysUsage().(*syscall.Rusage)
	cpu := time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
	return wall, float64(ru.Maxrss) / 1024, cpu.Seconds() // Linux: Maxrss in KiB
}

// BenchmarkImportVsScript is the issue 14 measurement: on the same 16-channel,
// 1 kHz, 1 000 000-row record, in the same run, the script a user would write
// instead (testdata/bench/script_import.py: Python's csv module, linear
// calibration, append a CSV, fsync every 0.25 s), then `liftyard import`
// (parse → calibrate → estimate → store, as a built binary), then
// `liftyard reprocess` of the imported run. It reports each one's readings/s,
// the ratios and the peak memory (max RSS) of import and reprocess. It needs
// python3 and takes about a minute: run it alone with
//
//	go test -run '^$' -bench ImportVsScript -benchtime 1x ./cmd/liftyard/
//
// LIFTYARD_BENCH_ROWS sets a shorter record for a quick look;
// LIFTYARD_BENCH_DIR keeps the record, the rig file and the store in that
// folder instead of a temporary one.
func BenchmarkImportVsScript(b *testing.B) {
	py, err := exec.LookPath("python3")
	if err != nil {
		b.Fatal("python3 is needed for the script side of the benchmark")
	}
	rows := benchRows
	if s := os.Getenv("LIFTYARD_BENCH_ROWS"); s != "" {
		if rows, err = strconv.Atoi(s); err != nil {
			b.Fatal(err)
		}
	}
	dir := os.Getenv("LIFTYARD_BENCH_DIR") // keep the record and the store there
	if dir == "" {
		dir = b.TempDir()
	}
	rigPath, csvPath, calPath := benchRecord(b, dir, rows)
	bin := filepath.Join(dir, "liftyard")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		b.Fatalf("go build: %v\n%s", err, out)
	}
	script, err := filepath.Abs(filepath.Join("..", "..", "testdata", "bench", "script_import.py"))
	if err != nil {
		b.Fatal(err)
	}
	readings := float64(rows) * float64(5+benchSpares)
	for b.Loop() {
		la, _ := os.ReadFile("/proc/loadavg")
		loadAvg := strings.Join(strings.Fields(string(la))[:min(3, len(strings.Fields(string(la))))], " ")
		db := filepath.Join(dir, "bench.db")
		out := filepath.Join(dir, "script-out.csv")
		os.Remove(db)
		os.Remove(out)
		scriptWall, scriptRSS, scriptCPU := timed(b, exec.Command(py, script, csvPath, out, calPath))
		importWall, importRSS, importCPU := timed(b, exec.Command(bin, "import", "--quiet", "--rig", rigPath, "--db", db, csvPath))
		reWall, reRSS, reCPU := timed(b, exec.Command(bin, "reprocess", "--quiet", "--db", db, "--run", "1"))
		b.ReportMetric(readings/scriptWall.Seconds(), "script-readings/s")
		b.ReportMetric(readings/importWall.Seconds(), "import-readings/s")
		b.ReportMetric(readings/reWall.Seconds(), "reprocess-readings/s")
		b.ReportMetric(scriptWall.Seconds()/importWall.Seconds(), "import/script")
		b.ReportMetric(scriptWall.Seconds()/reWall.Seconds(), "reprocess/script")
		b.ReportMetric(importRSS, "import-maxRSS-MB")
		b.ReportMetric(reRSS, "reprocess-maxRSS-MB")
		b.ReportMetric(scriptRSS, "script-maxRSS-MB")
		// Processor time is what a busy machine shares out: its ratio holds
		// when other work runs beside (wall time favours import's two cores).
		b.ReportMetric(scriptCPU/importCPU, "import/script-cpu")
		b.ReportMetric(scriptCPU/reCPU, "reprocess/script-cpu")
		b.Logf("%d rows × %d channels: script %.1f s (%.1f s CPU), import %.1f s (%.1f s CPU), reprocess %.1f s (%.1f s CPU); load average before: %s",
			rows, 5+benchSpares, scriptWall.Seconds(), scriptCPU, importWall.Seconds(), importCPU, reWall.Seconds(), reCPU, loadAvg)
	}
}

// BenchmarkImportRecord runs `liftyard import` in this process on the
// benchmark record (LIFTYARD_BENCH_ROWS rows, default 200 000), for a CPU
// profile of where import spends its time:
//
//	go test -run '^$' -bench ImportRecord -benchtime 1x -cpuprofile cpu.out ./cmd/liftyard/
//	go tool pprof -top cpu.out
func BenchmarkImportRecord(b *testing.B) {
	rows := 200_000
	if s := os.Getenv("LIFTYARD_BENCH_ROWS"); s != "" {
		var err error
		if rows, err = strconv.Atoi(s); err != nil {
			b.Fatal(err)
		}
	}
	dir := b.TempDir()
	rigPath, csvPath, _ := benchRecord(b, dir, rows)
	b.ReportAllocs()
	n := 0
	for b.Loop() {
		db := filepath.Join(dir, fmt.Sprintf("bench%d.db", n))
		n++
		var out, errb bytes.Buffer
		if code := run(b.Context(), []string{"import", "--quiet", "--rig", rigPath, "--db", db, csvPath}, &out, &errb); code != 0 {
			b.Fatalf("import: exit %d: %s", code, errb.String())
		}
	}
	b.ReportMetric(float64(rows)*float64(5+benchSpares)*float64(n)/b.Elapsed().Seconds(), "readings/s")
}

package acquire_test

import (
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"liftyard/acquire"
)

// device simulates a logger whose clock is off the host clock by offset and
// runs at (1 − driftPPM·1e-6) of its rate, and whose blocks reach the host
// after a random transport delay ≥ minDelay (invented figures for a wired
// amplifier and a Wi-Fi node).
type device struct {
	offset    time.Duration
	driftPPM  float64
	minDelay  time.Duration
	meanExtra time.Duration
}

// clockStart is when the simulated loggers' clocks were set: offset off
// the host clock, then drifting.
var clockStart = time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)

// deviceUs returns the device clock at true host time t.
func (d device) deviceUs(t time.Time) int64 {
	elapsed := float64(t.Sub(clockStart).Microseconds())
	return clockStart.UnixMicro() - d.offset.Microseconds() + int64(math.Round(elapsed*(1-d.driftPPM*1e-6)))
}

// Ensure that two sources whose clocks are seconds apart and drift in
// opposite directions are put on one timeline to within one sample period
// (5 ms at 200 Hz) after a minute of blocks (issue 4, "must show").
func TestAligner_TwoSourcesWithinOneSample(t *testing.T) {
	const samplePeriod = 5 * time.Millisecond
	start := clockStart
	devs := map[string]device{
		"balance": {offset: 3200 * time.Millisecond, driftPPM: 40, minDelay: 200 * time.Microsecond, meanExtra: 500 * time.Microsecond},
		"pitot":   {offset: -1700 * time.Millisecond, driftPPM: -25, minDelay: 500 * time.Microsecond, meanExtra: 8 * time.Millisecond},
	}
	rng := rand.New(rand.NewPCG(4, 2))
	var al acquire.Aligner
	const blockN = 20          // 100 ms blocks
	for k := 0; k < 600; k++ { // 60 s
		for _, name := range []string{"balance", "pitot"} {
			d := devs[name]
			t0 := start.Add(time.Duration(k) * blockN * samplePeriod)
			tLast := t0.Add((blockN - 1) * samplePeriod)
			delay := d.minDelay + time.Duration(rng.ExpFloat64()*float64(d.meanExtra))
			b := acquire.Block{Source: name, T0Us: d.deviceUs(t0), DtUs: samplePeriod.Microseconds(),
				Received: tLast.Add(delay), Series: []acquire.Series{{Channel: "x", Raw: make([]float64, blockN)}}}
			al.Align(&b)
			if k < 100 {
				continue
			}
			errUs := b.AlignedT0Us - t0.UnixMicro()
			if time.Duration(abs64(errUs))*time.Microsecond > samplePeriod {
				t.Fatalf("%s block %d: aligned %d µs off the true time", name, k, errUs)
			}
		}
	}
	// The same true instant, seen by both sources.
	probe := start.Add(59 * time.Second)
	a := al.Clock("balance").HostUs(devs["balance"].deviceUs(probe))
	b := al.Clock("pitot").HostUs(devs["pitot"].deviceUs(probe))
	if d := time.Duration(abs64(a-b)) * time.Microsecond; d > samplePeriod {
		t.Errorf("the sources disagree by %v at the same instant, want ≤ %v", d, samplePeriod)
	}
	// The estimated offsets and drifts are the devices' own.
	if off := al.Clock("balance").Offset(); (off - 3200*time.Millisecond).Abs() > 50*time.Millisecond {
		t.Errorf("balance offset %v, want about 3.2 s", off)
	}
	if ppm := al.Clock("pitot").DriftPPM(); math.Abs(ppm-(-25)) > 10 {
		t.Errorf("pitot drift %.1f ppm, want about −25", ppm)
	}
}

// Ensure that a device clock that jumps back (a logger reset) restarts the
// estimate instead of mapping new blocks with the old offset.
func TestClock_ResetStartsOver(t *testing.T) {
	var c acquire.Clock
	host := time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)
	for k := range 100 {
		c.Observe(1_000_000_000+int64(k)*100_000, host.Add(time.Duration(k)*100*time.Millisecond))
	}
	// The logger restarts its clock from zero.
	c.Observe(0, host.Add(10*time.Second))
	if got, want := c.HostUs(0), host.Add(10*time.Second).UnixMicro(); abs64(got-want) > 1000 {
		t.Errorf("after a reset, device 0 maps to %d, want %d", got, want)
	}
}

func abs64(x int64) int64 {
	if x < 0 {
		return -x
	}
	return x
}

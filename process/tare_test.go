package process_test

import (
	"path/filepath"
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"liftyard/acquire"
	"liftyard/acquire/sim"
	"liftyard/process"
	"liftyard/rig"
	"liftyard/storage"
)

// recordSweep stores a simulated flow-off angle sweep of the corrections
// rig as a run, as `liftyard record` would, and returns its id.
func recordSweep(t *testing.T, store *storage.Store, steps []float64, seed uint64) uint64 {
	t.Helper()
	r, err := rig.Parse("corr.toml", []byte(corrRig))
	require.NoError(t, err)
	s := corrSim(t, r, sim.Config{QPa: 1, FlowOff: true, StepsDeg: steps, Hold: 3 * time.Second,
		Move: 800 * time.Millisecond, Seed: seed, Start: time.Date(2026, 5, 4, 9, 0, 0, 0, time.UTC)})
	rec, err := process.NewRecorder(store, process.RecorderConfig{Rig: r, RigTOML: corrRig, Offline: true})
	require.NoError(t, err)
	var blocks acquire.Blocks
	n := int(float64(len(steps)) * (s.Config().Hold + s.Config().Move).Seconds() * s.Config().RateHz / float64(s.Config().BlockSamples))
	for range n {
		b := s.Next()
		b.Received = time.UnixMicro(b.T0Us)
		blocks = append(blocks, b)
	}
	_, err = process.Replay(t.Context(), blocks, rec.Pipeline(), rec.Keep)
	require.NoError(t, err)
	_, err = rec.Finish(t.Context(), nil, nil)
	require.NoError(t, err)
	return rec.RunID()
}

// Ensure that the weight tare fitted from a stored flow-off sweep (the
// holds found in the data, not from the simulator's schedule) recovers the
// simulated tare of each bridge output — the balance's cross-talk applied
// to the model's weight, X·w(α) — within its stated uncertainty.
func TestFitTareRun_RecoversSimulatedTare(t *testing.T) {
	steps := []float64{-8, -4, 0, 4, 8, 12, 16}
	store, err := storage.Open(filepath.Join(t.TempDir(), "tare.db"), storage.Options{})
	require.NoError(t, err)
	defer store.Close()
	id := recordSweep(t, store, steps, 21)
	sw, err := process.FitTareRun(t.Context(), store, id, 0)
	require.NoError(t, err)
	require.Len(t, sw.Holds, len(steps), "one hold per angle: %+v", sw.Holds)
	for i, h := range sw.Holds {
		assert.InDelta(t, steps[i], rig.Deg(h.AlphaRad), 0.05, "hold %d angle", i)
	}
	for j, out := range corrCells {
		var want [3]float64
		for k, in := range corrCells {
			for m := range 3 {
				want[m] += corrX[j][k] * corrTare[in][m]
			}
		}
		f := sw.Fit.Channels[out]
		for m := range 3 {
			// 4 standard uncertainties of the coefficient, plus rounding.
			assert.InDelta(t, want[m], f.Coef[m], 4*f.CoefU[m]+1e-9, "%s coefficient %d: %.4f ± %.4f, want %.4f", out, m, f.Coef[m], f.CoefU[m], want[m])
		}
		assert.Less(t, f.ResidualSD, 0.05, "%s: the model fits the sweep (simulator noise only)", out)
	}
	assert.Empty(t, sw.Warnings)
}

// Ensure that a sweep with too few angles is refused with a reason, and a
// fixed-angle rig cannot be swept.
func TestFitTareRun_TooFewAngles(t *testing.T) {
	store, err := storage.Open(filepath.Join(t.TempDir(), "few.db"), storage.Options{})
	require.NoError(t, err)
	defer store.Close()
	id := recordSweep(t, store, []float64{0, 5, 10}, 3)
	_, err = process.FitTareRun(t.Context(), store, id, 0)
	assert.ErrorContains(t, err, "3 holds found")
	assert.ErrorContains(t, err, "needs at least 4 angles")
}

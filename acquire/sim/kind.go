package sim

import (
	"context"
	"errors"
	"fmt"
	"time"

	"liftyard/acquire"
	"liftyard/rig"
)

// Simulator is a simulated rig of any kind: an acquire.Source whose blocks
// look like its rig's sensors in raw units.
type Simulator interface {
	// Run sends blocks until ctx is done (acquire.Source).
	Run(ctx context.Context, out chan<- acquire.Block) error
	// Preview is the block the simulator would send first, for its
	// channel list; it does not advance the simulation.
	Preview() acquire.Block
	// Stats counts the blocks made and dropped.
	Stats() *acquire.Health
}

// Common sets what every kind's simulator shares; a zero field takes the
// kind's default.
type Common struct {
	QPa        float64 // mean dynamic pressure of the simulated flow, Pa (required)
	RateHz     float64 // samples per second
	Seed       uint64  // random seed of turbulence and noise
	RhoKgPerM3 float64 // fluid density, for a rig that measures speed instead of Δp
	// StepsDeg and Hold set a foil or body sweep's angle steps and the
	// steady time per step (Config); nil and 0 take Config's defaults.
	// Rotor and roof rigs ignore them.
	StepsDeg []float64
	Hold     time.Duration
}

// ForRig builds the simulator for r's kind: the one place that maps a rig
// kind to its simulator (a roof's tap scanner; the force balance for a
// foil or a body; the force balance with a tachometer stepping the spin
// ratio for a rotor). A kind with no simulator is refused with
// ErrNoSimulator, never simulated with zeros (issue 12).
func ForRig(r *rig.Rig, c Common) (Simulator, error) {
	switch r.Kind {
	case rig.KindRoof:
		s, err := NewRoof(r, RoofConfig{QPa: c.QPa, RateHz: c.RateHz, Seed: c.Seed})
		if err != nil {
			return nil, fmt.Errorf("roof simulator: %w", err)
		}
		return s, nil
	case rig.KindFoil, rig.KindBody, rig.KindRotor:
		s, err := New(r, Config{QPa: c.QPa, RateHz: c.RateHz, Seed: c.Seed, StepsDeg: c.StepsDeg, Hold: c.Hold}, c.RhoKgPerM3)
		if err != nil {
			return nil, fmt.Errorf("%s simulator: %w", r.Kind, err)
		}
		return s, nil
	default:
		return nil, fmt.Errorf("rig kind %q: %w (simulators exist for foil, body, rotor and roof rigs)", r.Kind, ErrNoSimulator)
	}
}

// ErrNoSimulator is returned by ForRig when the rig's kind has no
// simulator.
var ErrNoSimulator = errors.New("no simulator for this kind of rig")

// Stats implements Simulator.
func (s *Rig) Stats() *acquire.Health { return &s.Health }

// Stats implements Simulator.
func (s *Roof) Stats() *acquire.Health { return &s.Health }

package sim

import (
	"context"
	"fmt"

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
}

// ForRig builds the simulator for r's kind: the one place that maps a rig
// kind to its simulator (a roof's tap scanner, else the force balance).
func ForRig(r *rig.Rig, c Common) (Simulator, error) {
	switch r.Kind {
	case rig.KindRoof:
		s, err := NewRoof(r, RoofConfig{QPa: c.QPa, RateHz: c.RateHz, Seed: c.Seed})
		if err != nil {
			return nil, fmt.Errorf("roof simulator: %w", err)
		}
		return s, nil
	default:
		return New(r, Config{QPa: c.QPa, RateHz: c.RateHz, Seed: c.Seed}, c.RhoKgPerM3)
	}
}

// Stats implements Simulator.
func (s *Rig) Stats() *acquire.Health { return &s.Health }

// Stats implements Simulator.
func (s *Roof) Stats() *acquire.Health { return &s.Health }

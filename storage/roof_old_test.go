package storage

import (
	"math"
	"testing"

	"liftyard/estimate"
)

// Ensure that a roof row stored before block peaks (issue 11: its cp_peak
// was an epoch value) reads back with its mean and no block number, block
// peak or direction, rather than with an epoch value under a block name.
func TestDecodeSegment_OldRoofRowReadsUnknown(t *testing.T) {
	raw := `{"index":0,"t_start":"2025-09-02T11:00:00Z","t_end":"2025-09-02T11:09:59.999Z","n":60000,"n_eff":850,` +
		`"alpha_rad":{"x":0,"u":0,"dof":0},"q_pa":{"x":96.4,"u":0.9,"dof":300},"speed_m_s":{"x":12.5,"u":0.06,"dof":300},` +
		`"rho_kg_m3":1.232,"mu_pa_s":1.77e-05,"re":0,"lift_n":{"x":0,"u":0,"dof":0},"drag_n":{"x":0,"u":0,"dof":0},` +
		`"cl":{"x":0,"u":0,"dof":0},"cd":{"x":0,"u":0,"dof":0},"spin_ratio":0,"design_cl":{"x":0,"u":0,"dof":0},"en":null,` +
		`"zone":"corner","cp_mean":{"x":-1.31,"u":0.045,"dof":210},"cp_rms":0.28,"cp_peak":-2.74,"uplift_n":{"x":-252.6,"u":9.3,"dof":210}}`
	g, err := decodeSegment([]byte(raw))
	if err != nil {
		t.Fatal(err)
	}
	if g.CpMean.X != -1.31 || g.Block != -1 || !math.IsNaN(g.CpPeak) || !math.IsNaN(g.DirectionRad) || !math.IsNaN(g.CpMin) {
		t.Errorf("old row read as %+v", g)
	}
	row := estimate.NewRow(1, "roof", &g)
	for _, c := range []string{"block", "cp_peak", "direction_deg", "cp_min"} {
		if v, ok := row.Value(c); ok {
			t.Errorf("old row has %s = %v, want absent", c, v)
		}
	}
	if v, _ := row.Value("cp_mean"); v != -1.31 {
		t.Errorf("cp_mean %v", v)
	}
}

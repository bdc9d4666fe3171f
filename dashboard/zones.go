package dashboard

// Roof returns the roof part of a segment row, nil on a force-balance row
// (for the templates: {{with .Roof}}).
//
// (a per-tap row is nil too: the taps are in the tap map and the export).
func (s segmentJSON) Roof() *roofView {
	if s.roof == nil || s.roof.Tap != "" {
		return nil
	}
	return s.roof
}

// AgreesText is "yes" when |En| ≤ 1, "no" when not, "—" without a design
// value (for the templates).
func (r roofView) AgreesText() string {
	switch {
	case r.Agrees == nil:
		return "—"
	case *r.Agrees:
		return "yes"
	}
	return "no"
}

package dashboard

// Roof returns the roof part of a segment row, nil on a force-balance row
// (for the templates: {{with .Roof}}).
func (s segmentJSON) Roof() *roofView { return s.roof }

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

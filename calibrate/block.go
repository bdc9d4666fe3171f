package calibrate

// Block is an acquire.Block after calibration: every series holds values in
// the SI unit of its channel's quantity (N, Pa, rad, K, ...).
// It is owned by its receiver, like acquire.Block.
type Block struct {
	Source string
	Seq    uint64
	T0Us   int64 // device clock at sample 0, µs
	DtUs   int64 // sample spacing, µs
	// AlignedT0Us is sample 0 on the shared host timeline (see
	// acquire.Aligner); 0 when not aligned.
	AlignedT0Us int64
	Series      []Series
}

// Series is one channel's calibrated values. U is the standard uncertainty of
// each value from its calibration (Type B); it is systematic within a run, so
// averaging does not reduce it.
type Series struct {
	Channel string
	Values  []float64 // SI; NaN = no sample
	U       float64   // standard uncertainty of one value from the calibration, SI
	URel    float64   // relative standard uncertainty of the calibration's span: u = URel·|value|, on top of U (0: none)
	Dof     float64   // degrees of freedom of U (+Inf when stated without doubt)
}

// Len returns the number of sample times.
func (b *Block) Len() int {
	if len(b.Series) == 0 {
		return 0
	}
	return len(b.Series[0].Values)
}

// Find returns the named series, or nil.
func (b *Block) Find(channel string) *Series {
	for i := range b.Series {
		if b.Series[i].Channel == channel {
			return &b.Series[i]
		}
	}
	return nil
}

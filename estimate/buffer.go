package estimate

// sampleBuf holds joined samples column by column, ready for Reduce.
type sampleBuf struct {
	tUs                                   []int64
	normalN, axialN, qPa, alphaRad, tempK []float64
	spinRadPerS                           []float64
}

func (b *sampleBuf) len() int { return len(b.tUs) }

func (b *sampleBuf) push(s sample) {
	b.tUs = append(b.tUs, s.tUs)
	b.normalN = append(b.normalN, s.normalN)
	b.axialN = append(b.axialN, s.axialN)
	b.qPa = append(b.qPa, s.qPa)
	b.alphaRad = append(b.alphaRad, s.alphaRad)
	b.tempK = append(b.tempK, s.tempK)
	b.spinRadPerS = append(b.spinRadPerS, s.spinRadPerS)
}

func (b *sampleBuf) appendBuf(o *sampleBuf) {
	b.tUs = append(b.tUs, o.tUs...)
	b.normalN = append(b.normalN, o.normalN...)
	b.axialN = append(b.axialN, o.axialN...)
	b.qPa = append(b.qPa, o.qPa...)
	b.alphaRad = append(b.alphaRad, o.alphaRad...)
	b.tempK = append(b.tempK, o.tempK...)
	b.spinRadPerS = append(b.spinRadPerS, o.spinRadPerS...)
}

// truncate keeps the first n samples.
func (b *sampleBuf) truncate(n int) {
	if n < 0 || n >= b.len() {
		return
	}
	b.tUs = b.tUs[:n]
	b.normalN = b.normalN[:n]
	b.axialN = b.axialN[:n]
	b.qPa = b.qPa[:n]
	b.alphaRad = b.alphaRad[:n]
	b.tempK = b.tempK[:n]
	b.spinRadPerS = b.spinRadPerS[:n]
}

// reset empties the buffer and keeps its storage, so a segment's memory is
// reused by the next one (bounded by the segment cap).
func (b *sampleBuf) reset() {
	b.tUs = b.tUs[:0]
	b.normalN = b.normalN[:0]
	b.axialN = b.axialN[:0]
	b.qPa = b.qPa[:0]
	b.alphaRad = b.alphaRad[:0]
	b.tempK = b.tempK[:0]
	b.spinRadPerS = b.spinRadPerS[:0]
}

// ring is a fixed-capacity buffer of the most recent samples (the live
// window). Its storage never grows after newRing.
type ring struct {
	buf   []sample
	start int
	n     int
}

func newRing(capacity int) ring { return ring{buf: make([]sample, capacity)} }

func (r *ring) cap() int { return len(r.buf) }
func (r *ring) len() int { return r.n }

func (r *ring) push(s sample) {
	if len(r.buf) == 0 {
		return
	}
	if r.n < len(r.buf) {
		r.buf[(r.start+r.n)%len(r.buf)] = s
		r.n++
		return
	}
	r.buf[r.start] = s
	r.start = (r.start + 1) % len(r.buf)
}

// ordered copies the samples oldest first into a new sampleBuf.
func (r *ring) ordered() sampleBuf {
	var b sampleBuf
	b.tUs = make([]int64, 0, r.n)
	for _, col := range []*[]float64{&b.normalN, &b.axialN, &b.qPa, &b.alphaRad, &b.tempK, &b.spinRadPerS} {
		*col = make([]float64, 0, r.n)
	}
	for i := range r.n {
		b.push(r.buf[(r.start+i)%len(r.buf)])
	}
	return b
}

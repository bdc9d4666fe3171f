package acquire

import (
	"io"
	"time"
)

// ReadRawCSVStraight is ReadRawCSVAt through encoding/csv only: the plain
// path the fast splitter is checked against.
func ReadRawCSVStraight(r io.Reader, source string, blockSamples int, start time.Time, emit func(Block) error) error {
	return readRawCSV(r, source, blockSamples, start, rawReadOptions{straight: true}, emit)
}

// ParseFloatBytes is the fast number parser of the raw CSV reader.
func ParseFloatBytes(s []byte) (float64, error) { return parseFloat(s) }

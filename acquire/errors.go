package acquire

import "errors"

// ErrPayload is returned when an MQTT block payload is not valid JSON of the
// block form, or its fields are inconsistent (arrays of different lengths, a
// non-positive dt_us, no channels).
var ErrPayload = errors.New("bad block payload")

// PayloadError says what is wrong with one payload and why it was rejected.
// It wraps ErrPayload.
type PayloadError struct {
	Source string
	Reason Reason
	Msg    string
}

func (e *PayloadError) Error() string {
	if e.Source == "" {
		return "payload: " + e.Msg
	}
	return "source " + e.Source + ": payload: " + e.Msg
}

func (e *PayloadError) Unwrap() error { return ErrPayload }

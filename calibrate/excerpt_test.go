package calibrate_test

import (
	"strings"
	"testing"

	"liftyard/calibrate"
)

// Ensure that a points-file error quotes an excerpt of a bad field, not the
// field (issue 16).
func TestReadPoints_QuotesExcerpt(t *testing.T) {
	huge := strings.Repeat("7q", 1<<20)
	for _, in := range []string{
		"applied,reading\n0," + huge + "\n",
		"applied,reading," + huge + "\n0,1\n",
	} {
		_, err := calibrate.ReadPoints(strings.NewReader(in))
		if err == nil {
			t.Fatal("accepted")
		}
		if msg := err.Error(); len(msg) > 600 || !strings.Contains(msg, "…") {
			t.Errorf("message of %d bytes: %.200s", len(msg), msg)
		}
	}
}

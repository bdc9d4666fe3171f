package acquire_test

import (
	"strings"
	"testing"
	"unicode/utf8"

	"liftyard/acquire"
)

// Ensure that the parsers' errors quote an excerpt of a bad field, not the
// field (issue 16: an error echoed a 5 MB field in full): a raw CSV value,
// a raw CSV header and a payload's channel name.
func TestErrors_QuoteExcerpts(t *testing.T) {
	huge := strings.Repeat("9x", 1<<20) // 2 MB, not a number
	for name, run := range map[string]func() error{
		"raw CSV value": func() error {
			return acquire.ReadRawCSV(strings.NewReader("t_s,a\n0,"+huge+"\n"), "raw.csv", 10, func(acquire.Block) error { return nil })
		},
		"raw CSV header": func() error {
			return acquire.ReadRawCSV(strings.NewReader("time,"+huge+"\n0,1\n"), "raw.csv", 10, func(acquire.Block) error { return nil })
		},
		"payload channel": func() error {
			_, err := acquire.DecodePayload("s", []byte(`{"seq":1,"t_us":1,"dt_us":1,"v":{"`+huge+`":[1],"b":[1,2]}}`))
			return err
		},
	} {
		err := run()
		if err == nil {
			t.Fatalf("%s: accepted", name)
		}
		if msg := err.Error(); len(msg) > 600 || !utf8.ValidString(msg) {
			t.Errorf("%s: message of %d bytes: %.200s", name, len(msg), msg)
		}
	}
}

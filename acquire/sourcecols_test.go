package acquire_test

import (
	"strings"
	"testing"

	"liftyard/acquire"
)

// Ensure that a column name splits into source and channel only when it is
// source/channel with both parts present.
func TestSplitColumn(t *testing.T) {
	for _, tt := range []struct {
		name, src, ch string
		ok            bool
	}{
		{"amp/n_fore", "amp", "n_fore", true},
		{"pitot-node.2/dp", "pitot-node.2", "dp", true},
		{"n_fore", "", "n_fore", false},
		{"/n_fore", "", "/n_fore", false},
		{"amp/", "", "amp/", false},
		{"a/b/c", "", "a/b/c", false},
		{"", "", "", false},
	} {
		t.Run(tt.name, func(t *testing.T) {
			src, ch, ok := acquire.SplitColumn(tt.name)
			if src != tt.src || ch != tt.ch || ok != tt.ok {
				t.Errorf("SplitColumn(%q) = %q, %q, %v; want %q, %q, %v", tt.name, src, ch, ok, tt.src, tt.ch, tt.ok)
			}
		})
	}
}

// Ensure that a block with source/channel series splits into one block per
// source with the same timebase, the file's first source last, and that a
// plain block passes through untouched.
func TestSplitSources(t *testing.T) {
	b := acquire.Block{Source: "file", Seq: 7, T0Us: 1000, DtUs: 10, Series: []acquire.Series{
		{Channel: "amp/n_fore", Raw: []float64{1, 2}},
		{Channel: "amp/alpha", Raw: []float64{3, 4}},
		{Channel: "pitotnode/pitot", Raw: []float64{5, 6}},
		{Channel: "t_water", Raw: []float64{7, 8}},
	}}
	got := acquire.SplitSources(b)
	var desc []string
	for _, p := range got {
		var chs []string
		for _, s := range p.Series {
			chs = append(chs, s.Channel)
		}
		if p.T0Us != 1000 || p.DtUs != 10 || p.Seq != 7 || p.Len() != 2 {
			t.Errorf("block %s: t0 %d dt %d seq %d n %d", p.Source, p.T0Us, p.DtUs, p.Seq, p.Len())
		}
		desc = append(desc, p.Source+":"+strings.Join(chs, ","))
	}
	if want := "pitotnode:pitot file:t_water amp:n_fore,alpha"; strings.Join(desc, " ") != want {
		t.Errorf("split into %q, want %q", strings.Join(desc, " "), want)
	}
	plain := acquire.Block{Source: "carriage", Series: []acquire.Series{{Channel: "n_fore", Raw: []float64{1}}}}
	if got := acquire.SplitSources(plain); len(got) != 1 || got[0].Source != "carriage" || got[0].Series[0].Channel != "n_fore" {
		t.Errorf("plain block split into %+v", got)
	}
}

// FuzzSplitColumn: a split never loses or adds a byte, and never yields a
// part holding the separator or an empty part.
func FuzzSplitColumn(f *testing.F) {
	for _, s := range []string{"amp/n_fore", "n_fore", "/", "a//b", "amp/", "\ufeffa/b"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, name string) {
		src, ch, ok := acquire.SplitColumn(name)
		if !ok {
			if src != "" || ch != name {
				t.Fatalf("%q: not split but got %q, %q", name, src, ch)
			}
			return
		}
		if src+acquire.SourceSep+ch != name || src == "" || ch == "" || strings.Contains(src, acquire.SourceSep) || strings.Contains(ch, acquire.SourceSep) {
			t.Fatalf("%q split into %q, %q", name, src, ch)
		}
	})
}

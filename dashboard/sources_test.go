package dashboard_test

import (
	"net/http"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/dashboard"
	"liftyard/storage"
)

// Ensure that the run page's sources table leaves out a source whose every
// counter is zero (the store's own row on a clean run) and keeps the real
// ones (issue 13).
func TestRunPage_NoAllZeroSourceRow(t *testing.T) {
	st, err := storage.Open(filepath.Join(t.TempDir(), "src.db"), storage.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	t0 := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	id, err := st.CreateRun(storage.Run{Rig: "yard foil", Kind: "foil", Fluid: "fresh_water", AreaM2: 0.1, Started: t0})
	if err != nil {
		t.Fatal(err)
	}
	srcs := []acquire.HealthSnapshot{{Source: "carriage", Frames: 120, Samples: 2400}, {Source: "store"}}
	if err := st.FinishRun(id, t0.Add(time.Minute), storage.StatusComplete, srcs); err != nil {
		t.Fatal(err)
	}
	s, _ := newServer(t, dashboard.Config{Runs: st})
	body := get(t, s.Handler(), http.MethodGet, "/runs/1", nil).Body.String()
	if !strings.Contains(body, "<td>carriage</td>") {
		t.Errorf("the carriage row is missing")
	}
	if strings.Contains(body, "<td>store</td>") {
		t.Errorf("an all-zero store row is shown")
	}
	if strings.Contains(body, "fresh_water") || !strings.Contains(body, "fresh water") {
		t.Errorf("the fluid is shown as a raw identifier")
	}
}

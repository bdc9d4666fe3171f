package dashboard_test

import (
	"encoding/json"
	"net/http"
	"testing"

	"liftyard/dashboard"
)

// Ensure that the store's state reaches GET /api/v1/health and sets the
// health state: a failing store is an alarm, low disk space a warning, and
// the message is there for the live page's banner (issue 16).
func TestHealth_StoreState(t *testing.T) {
	for _, tc := range []struct {
		name  string
		store dashboard.StoreHealth
		want  string
	}{
		{"unset", dashboard.StoreHealth{}, "ok"},
		{"well", dashboard.StoreHealth{State: "ok"}, "ok"},
		{"low space", dashboard.StoreHealth{State: "warning", Message: "LOW DISK SPACE: 120.0 MB free"}, "warning"},
		{"failing", dashboard.StoreHealth{State: "alarm", Message: "STORE FAILING since 10:00:00 UTC"}, "alarm"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s, _ := newServer(t, dashboard.Config{Live: true})
			s.PublishHealth(dashboard.Health{Store: tc.store})
			rec := get(t, s.Handler(), http.MethodGet, "/api/v1/health", nil)
			if rec.Code != http.StatusOK {
				t.Fatalf("status %d: %s", rec.Code, rec.Body)
			}
			var got struct {
				State string                `json:"state"`
				Store dashboard.StoreHealth `json:"store"`
			}
			if err := json.Unmarshal(rec.Body.Bytes(), &got); err != nil {
				t.Fatal(err)
			}
			if got.State != tc.want || got.Store.State != tc.want || got.Store.Message != tc.store.Message {
				t.Errorf("health state %q, store %+v; want %q with message %q", got.State, got.Store, tc.want, tc.store.Message)
			}
		})
	}
}

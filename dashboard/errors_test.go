package dashboard_test

import (
	"strings"
	"testing"

	"liftyard/dashboard"
)

// Ensure that a page error is a styled page with the navigation and the
// message (not plain text), and an API error stays JSON.
func TestErrorPages(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true, Runs: testRuns()})
	h := s.Handler()
	tests := []struct {
		path   string
		status int
		ctype  string
		want   []string
	}{
		{"/nowhere", 404, "text/html; charset=utf-8", []string{`href="/static/style.css"`, `<a href="/runs"`, "Not found", `there is no page at &#34;/nowhere&#34;`}},
		{"/runs/999", 404, "text/html; charset=utf-8", []string{`<a href="/runs"`, "no such run", "All runs"}},
		{"/runs/-1", 400, "text/html; charset=utf-8", []string{`<a href="/runs"`, "not a positive whole number"}},
		{"/logout", 405, "text/html; charset=utf-8", []string{`<a href="/runs"`, "GET is not allowed"}},
		{"/api/v1/nowhere", 404, "application/json", []string{`{"error":"there is no page at \"/api/v1/nowhere\" on this dashboard"}`}},
		{"/api/v1/runs/999", 404, "application/json", []string{`{"error":"no such run"}`}},
	}
	for _, tt := range tests {
		rec := get(t, h, "GET", tt.path, nil)
		body := rec.Body.String()
		if rec.Code != tt.status || rec.Header().Get("Content-Type") != tt.ctype {
			t.Errorf("GET %s: %d %q, want %d %q", tt.path, rec.Code, rec.Header().Get("Content-Type"), tt.status, tt.ctype)
		}
		for _, w := range tt.want {
			if !strings.Contains(body, w) {
				t.Errorf("GET %s: body lacks %q:\n%s", tt.path, w, body)
			}
		}
	}
	if rec := get(t, h, "GET", "/logout", nil); rec.Header().Get("Allow") == "" {
		t.Errorf("405 without an Allow header")
	}
}

package dashboard_test

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"liftyard/acquire"
	"liftyard/calibrate"
	"liftyard/dashboard"
	"liftyard/estimate"
	"liftyard/internal/browsertest"
	"liftyard/rig"
	"liftyard/storage"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

func TestMain(m *testing.M) {
	code := m.Run()
	browsertest.Shutdown()
	os.Exit(code)
}

// hostileRig is a rig name as a rig file might carry it: html/template must
// escape it everywhere it is shown.
const hostileRig = `<script>alert(1)</script>`

// epoch is the fixed wall clock of the tests (a scenario of our own: a
// strut towed on a summer morning).
var epoch = time.Date(2025, 6, 14, 9, 30, 0, 0, time.UTC)

func fixedNow() time.Time { return epoch.Add(90 * time.Second) }

// fakeStore is an in-memory RunStore. The real store is tested in storage;
// the end-to-end test in cmd/liftyard uses it with this server.
type fakeStore struct {
	runs map[uint64]storage.Run
	segs map[uint64][]estimate.Segment
	err  error // returned by every method when set
}

func (f *fakeStore) Runs() ([]storage.Run, error) {
	if f.err != nil {
		return nil, f.err
	}
	var out []storage.Run
	for _, r := range f.runs {
		out = append(out, r)
	}
	return out, nil
}

func (f *fakeStore) Run(id uint64) (storage.Run, error) {
	if f.err != nil {
		return storage.Run{}, f.err
	}
	r, ok := f.runs[id]
	if !ok {
		return storage.Run{}, fmt.Errorf("run %d: %w", id, storage.ErrNotFound)
	}
	return r, nil
}

func (f *fakeStore) Segments(id uint64) ([]estimate.Segment, error) {
	if f.err != nil {
		return nil, f.err
	}
	if _, ok := f.runs[id]; !ok {
		return nil, fmt.Errorf("run %d: %w", id, storage.ErrNotFound)
	}
	return f.segs[id], nil
}

// v is a measured value with ν = +Inf (k = 1.96), to keep goldens simple.
func v(x, u float64) calibrate.Value { return calibrate.Value{X: x, U: u, Dof: math.Inf(1)} }

// segment returns invented polar point i of a strut sweep.
func segment(i int, alphaDeg, cl float64) estimate.Segment {
	t0 := epoch.Add(time.Duration(10+20*i) * time.Second)
	return estimate.Segment{
		Index: i, TStart: t0, TEnd: t0.Add(12 * time.Second), N: 12000, NEff: 240,
		AlphaRad: v(rig.Rad(alphaDeg), rig.Rad(0.05)), QPa: v(612.5, 1.5), SpeedMPerS: v(1.107, 0.0014),
		RhoKgPerM3: 999.1, MuPaS: 1.138e-3, Re: 2.9e5,
		LiftN: v(cl*612.5*0.12, 0.4), DragN: v(3.1, 0.2), CL: v(cl, 0.012), CD: v(0.042, 0.003),
		En: math.NaN(),
	}
}

func liveSample(n int, cl float64) estimate.Live {
	return estimate.Live{
		T: epoch.Add(time.Duration(n) * 100 * time.Millisecond), Window: 2 * time.Second, N: n,
		AlphaRad: v(rig.Rad(4), rig.Rad(0.05)), QPa: v(612.5, 1.5), SpeedMPerS: v(1.107, 0.0014),
		RhoKgPerM3: 999.1, Re: 2.9e5, LiftN: v(cl*612.5*0.12, 0.4), DragN: v(3.1, 0.2),
		CL: v(cl, 0.012), CD: v(0.042, 0.003), Steady: true, Segments: 2,
		Warnings: []string{"load cell n_fore at 83 % of rated capacity"},
	}
}

func testRuns() *fakeStore {
	return &fakeStore{
		runs: map[uint64]storage.Run{
			1: {ID: 1, Rig: hostileRig, Kind: "foil", Fluid: "fresh_water", AreaM2: 0.12, AreaKind: "planform",
				Started: epoch.Add(-time.Hour), Ended: epoch.Add(-50 * time.Minute), Status: storage.StatusComplete,
				Samples: 600000, Segments: 3,
				Sources: []acquire.HealthSnapshot{{Source: "balance", Frames: 6000, Samples: 600000, Rejected: 2,
					RejectedBy: map[string]uint64{"crc": 2}, Gaps: 1}}},
			2: {ID: 2, Rig: "strut-b", Kind: "foil", Fluid: "fresh_water", AreaM2: 0.12, AreaKind: "planform",
				Started: epoch, Status: storage.StatusRecording, Samples: 90000},
		},
		segs: map[uint64][]estimate.Segment{
			1: {segment(0, 0, 0.02), segment(1, 4, 0.43), segment(2, 8, 0.81)},
		},
	}
}

// newServer builds a loopback server with the fake store and a log buffer.
func newServer(t *testing.T, cfg dashboard.Config) (*dashboard.Server, *syncBuffer) {
	t.Helper()
	var logs syncBuffer
	cfg.Logger = slog.New(slog.NewTextHandler(&logs, nil))
	if cfg.Now == nil {
		cfg.Now = fixedNow
	}
	s, err := dashboard.New(cfg)
	if err != nil {
		t.Fatalf("New: %v", err)
	}
	return s, &logs
}

type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}
func (s *syncBuffer) String() string { s.mu.Lock(); defer s.mu.Unlock(); return s.b.String() }

// get runs one request through the handler with a loopback Host.
func get(t *testing.T, h http.Handler, method, target string, hdr map[string]string) *httptest.ResponseRecorder {
	t.Helper()
	req := httptest.NewRequest(method, target, nil)
	req.Host = "127.0.0.1:8470"
	for k, v := range hdr {
		if k == "Host" {
			req.Host = v
			continue
		}
		req.Header.Set(k, v)
	}
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, req)
	return rec
}

// Ensure that every route answers with the right status and content type.
func TestRoutes(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true, Runs: testRuns()})
	h := s.Handler()
	// Before the first estimate the live API says so.
	rec := get(t, h, "GET", "/api/v1/live", nil)
	if rec.Code != http.StatusServiceUnavailable || !strings.HasPrefix(rec.Header().Get("Content-Type"), "application/json") ||
		!strings.Contains(rec.Body.String(), `"error"`) {
		t.Fatalf("live before first estimate: %d %q %s", rec.Code, rec.Header().Get("Content-Type"), rec.Body)
	}
	s.SetRun(testRuns().runs[2])
	s.PublishLive(liveSample(20, 0.43))

	tests := []struct {
		name, path string
		status     int
		ctype      string
	}{
		{"live page", "/", 200, "text/html; charset=utf-8"},
		{"runs page", "/runs", 200, "text/html; charset=utf-8"},
		{"run page", "/runs/1", 200, "text/html; charset=utf-8"},
		{"current run page", "/runs/2", 200, "text/html; charset=utf-8"},
		{"polar", "/runs/1/polar.svg", 200, "image/svg+xml"},
		{"script", "/static/live.js", 200, "text/javascript; charset=utf-8"},
		{"style", "/static/style.css", 200, "text/css; charset=utf-8"},
		{"icon", "/static/icon.svg", 200, "image/svg+xml"},
		{"api live", "/api/v1/live", 200, "application/json"},
		{"api runs", "/api/v1/runs", 200, "application/json"},
		{"api run", "/api/v1/runs/1", 200, "application/json"},
		{"api segments", "/api/v1/runs/1/segments", 200, "application/json"},
		{"api unknown run", "/api/v1/runs/999", 404, "application/json"},
		{"api unknown segments", "/api/v1/runs/999/segments", 404, "application/json"},
		{"api bad id", "/api/v1/runs/abc", 400, "application/json"},
		{"api zero id", "/api/v1/runs/0", 400, "application/json"},
		{"unknown run page", "/runs/999", 404, "text/html; charset=utf-8"},
		{"unknown polar", "/runs/999/polar.svg", 404, "text/html; charset=utf-8"},
		{"bad run page", "/runs/-1", 400, "text/html; charset=utf-8"},
		{"no such page", "/nowhere", 404, "text/html; charset=utf-8"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			rec := get(t, h, "GET", tt.path, nil)
			if rec.Code != tt.status {
				t.Errorf("GET %s: status %d, want %d; body %s", tt.path, rec.Code, tt.status, rec.Body)
			}
			if got := rec.Header().Get("Content-Type"); got != tt.ctype {
				t.Errorf("GET %s: Content-Type %q, want %q", tt.path, got, tt.ctype)
			}
			if got := rec.Header().Get("X-Content-Type-Options"); got != "nosniff" {
				t.Errorf("GET %s: X-Content-Type-Options %q", tt.path, got)
			}
		})
	}
	// A state-changing route refuses GET.
	if rec := get(t, h, "GET", "/logout", nil); rec.Code != http.StatusMethodNotAllowed {
		t.Errorf("GET /logout: %d, want 405", rec.Code)
	}
}

// Ensure that a failing store gives a generic 500 and logs the detail.
func TestStoreError_500(t *testing.T) {
	st := testRuns()
	st.err = errors.New("disk on fire at block 77")
	s, logs := newServer(t, dashboard.Config{Live: true, Runs: st})
	for _, path := range []string{"/api/v1/runs", "/runs", "/api/v1/runs/1"} {
		rec := get(t, s.Handler(), "GET", path, nil)
		if rec.Code != 500 {
			t.Errorf("GET %s: %d, want 500", path, rec.Code)
		}
		if strings.Contains(rec.Body.String(), "disk on fire") {
			t.Errorf("GET %s: detail leaked to the client: %s", path, rec.Body)
		}
	}
	if !strings.Contains(logs.String(), "disk on fire at block 77") {
		t.Errorf("detail not logged; log:\n%s", logs)
	}
}

// Ensure that on loopback only a loopback Host with our port is served
// (DNS rebinding).
func TestHostCheck(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true})
	tests := []struct {
		host   string
		status int
	}{
		{"127.0.0.1:8470", 200},
		{"localhost:8470", 200},
		{"[::1]:8470", 200},
		{"evil.example", 403},
		{"evil.example:8470", 403},
		{"127.0.0.1:9999", 403},
		{"localhost.evil.example:8470", 403},
		{"", 403},
	}
	for _, tt := range tests {
		rec := get(t, s.Handler(), "GET", "/api/v1/runs", map[string]string{"Host": tt.host})
		if rec.Code != tt.status {
			t.Errorf("Host %q: %d, want %d", tt.host, rec.Code, tt.status)
		}
	}
}

// Ensure that New refuses a non-loopback address without a good token and
// a malformed address, with a message that says what to do.
func TestNew_Errors(t *testing.T) {
	tests := []struct {
		name string
		cfg  dashboard.Config
		want string
	}{
		{"no token off loopback", dashboard.Config{Addr: "0.0.0.0:8470"}, "a token is required"},
		{"all interfaces", dashboard.Config{Addr: ":8470"}, "a token is required"},
		{"short token", dashboard.Config{Addr: "192.168.1.20:8470", Token: "abc"}, "use at least 16"},
		{"no port", dashboard.Config{Addr: "127.0.0.1"}, "write host:port"},
		{"bad port", dashboard.Config{Addr: "127.0.0.1:http"}, "port \"http\""},
	}
	for _, tt := range tests {
		_, err := dashboard.New(tt.cfg)
		if err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%s: err %v, want it to contain %q", tt.name, err, tt.want)
		}
	}
	if _, err := dashboard.New(dashboard.Config{Addr: "localhost:0"}); err != nil {
		t.Errorf("loopback without token: %v", err)
	}
}

const goodToken = "yard-7f3c9a1e5b2d4c60"

// Ensure that off loopback every request needs the token, by header or by
// the cookie that /?token= sets.
func TestToken(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true, Addr: "0.0.0.0:8470", Token: goodToken, Runs: testRuns()})
	h := s.Handler()
	host := map[string]string{"Host": "yard-pc.local:8470"}
	if rec := get(t, h, "GET", "/api/v1/runs", host); rec.Code != 401 || rec.Header().Get("WWW-Authenticate") == "" {
		t.Errorf("no token: %d %v, want 401 with WWW-Authenticate", rec.Code, rec.Header())
	}
	for _, auth := range []string{"Bearer wrong-token-0000000000", "Basic " + goodToken, goodToken} {
		if rec := get(t, h, "GET", "/api/v1/runs", map[string]string{"Host": "yard-pc.local:8470", "Authorization": auth}); rec.Code != 401 {
			t.Errorf("Authorization %q: %d, want 401", auth, rec.Code)
		}
	}
	if rec := get(t, h, "GET", "/api/v1/runs", map[string]string{"Host": "yard-pc.local:8470", "Authorization": "Bearer " + goodToken}); rec.Code != 200 {
		t.Errorf("bearer token: %d, want 200", rec.Code)
	}
	if rec := get(t, h, "GET", "/?token=wrong-token-0000000000", host); rec.Code != 401 {
		t.Errorf("wrong ?token=: %d, want 401", rec.Code)
	}
	// ?token= sets the cookie and redirects to the same page without it.
	rec := get(t, h, "GET", "/runs?token="+goodToken, host)
	if rec.Code != http.StatusSeeOther || rec.Header().Get("Location") != "/runs" {
		t.Fatalf("?token=: %d Location %q, want 303 to /runs", rec.Code, rec.Header().Get("Location"))
	}
	cookies := rec.Result().Cookies()
	if len(cookies) != 1 || cookies[0].Name != "token" || !cookies[0].HttpOnly {
		t.Fatalf("cookies %v, want one HttpOnly token cookie", cookies)
	}
	req := httptest.NewRequest("GET", "/runs", nil)
	req.Host = "yard-pc.local:8470"
	req.AddCookie(cookies[0])
	rec = httptest.NewRecorder()
	h.ServeHTTP(rec, req)
	if rec.Code != 200 || !strings.Contains(rec.Body.String(), "Sign out") {
		t.Errorf("with cookie: %d, want 200 and a sign-out button", rec.Code)
	}
	// The Host check is for loopback only: any Host works with the token.
	if rec := get(t, h, "GET", "/api/v1/runs", map[string]string{"Host": "10.0.0.5:8470", "Authorization": "Bearer " + goodToken}); rec.Code != 200 {
		t.Errorf("token with another Host: %d, want 200", rec.Code)
	}
}

// Ensure that a cross-origin browser POST is rejected and a same-origin one
// passes (Go's CrossOriginProtection).
func TestCrossOriginPOST(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true})
	tests := []struct {
		name   string
		hdr    map[string]string
		status int
	}{
		{"cross-site fetch", map[string]string{"Sec-Fetch-Site": "cross-site"}, 403},
		{"same-site other port", map[string]string{"Sec-Fetch-Site": "same-site"}, 403},
		{"foreign Origin", map[string]string{"Origin": "http://evil.example"}, 403},
		{"same origin", map[string]string{"Sec-Fetch-Site": "same-origin"}, 303},
		{"same Origin", map[string]string{"Origin": "http://127.0.0.1:8470"}, 303},
		{"no browser headers", nil, 303},
	}
	for _, tt := range tests {
		if rec := get(t, s.Handler(), "POST", "/logout", tt.hdr); rec.Code != tt.status {
			t.Errorf("%s: POST /logout %d, want %d", tt.name, rec.Code, tt.status)
		}
	}
}

// Ensure that a hostile rig name is escaped on every page that shows it.
func TestEscaping_HostileRigName(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true, Runs: testRuns()})
	s.SetRun(storage.Run{ID: 3, Rig: hostileRig, Kind: "foil", Fluid: "air", Status: storage.StatusRecording, Started: epoch})
	for _, path := range []string{"/", "/runs", "/runs/1", "/runs/3"} {
		body := get(t, s.Handler(), "GET", path, nil).Body.String()
		if strings.Contains(body, hostileRig) {
			t.Errorf("%s: rig name not escaped", path)
		}
		if !strings.Contains(body, "&lt;script&gt;alert(1)&lt;/script&gt;") {
			t.Errorf("%s: escaped rig name missing", path)
		}
	}
}

// Ensure that the API JSON matches the golden files (go test -update to
// rewrite them; read the diff before committing).
func TestAPI_Golden(t *testing.T) {
	st := testRuns()
	s, _ := newServer(t, dashboard.Config{Live: true, Runs: st})
	cur := st.runs[2]
	s.SetRun(cur)
	live := liveSample(20, 0.43)
	live.SpeedMPerS = calibrate.Value{} // not measured → null
	live.Re = math.NaN()                // not computable → null
	s.PublishLive(live)
	s.PublishSegment(segment(0, -2, -0.19))
	tests := []struct{ name, path string }{
		{"live", "/api/v1/live"},
		{"runs", "/api/v1/runs"},
		{"run", "/api/v1/runs/1"},
		{"segments", "/api/v1/runs/1/segments"},
		{"current_segments", "/api/v1/runs/2/segments"},
		{"not_found", "/api/v1/runs/999"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			rec := get(t, s.Handler(), "GET", tt.path, nil)
			var pretty bytes.Buffer
			if err := json.Indent(&pretty, rec.Body.Bytes(), "", "  "); err != nil {
				t.Fatalf("GET %s: not JSON: %v\n%s", tt.path, err, rec.Body)
			}
			golden := filepath.Join("testdata", "api", tt.name+".golden")
			if *update {
				if err := os.WriteFile(golden, pretty.Bytes(), 0o644); err != nil {
					t.Fatal(err)
				}
			}
			want, err := os.ReadFile(golden)
			if err != nil {
				t.Fatalf("read golden (run with -update to create): %v", err)
			}
			if !bytes.Equal(pretty.Bytes(), want) {
				t.Errorf("GET %s differs from %s:\ngot:\n%s\nwant:\n%s", tt.path, golden, pretty.Bytes(), want)
			}
		})
	}
}

// Ensure that the live JSON carries the published numbers under the
// contract's field names, with display conversions only (° from rad, U95).
func TestAPILive_Fields(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true})
	l := liveSample(7, 0.43)
	s.PublishLive(l)
	var got map[string]any
	if err := json.Unmarshal(get(t, s.Handler(), "GET", "/api/v1/live", nil).Body.Bytes(), &got); err != nil {
		t.Fatal(err)
	}
	want := map[string]float64{
		"q_pa": 612.5, "q_u95_pa": l.QPa.U95(), "speed_m_s": 1.107, "alpha_deg": 4, "alpha_u95_deg": 0.05 * calibrate.K95(math.Inf(1)),
		"cl": 0.43, "cl_u95": l.CL.U95(), "cd": 0.042, "cd_u95": l.CD.U95(), "re": 2.9e5, "rho_kg_m3": 999.1, "n": 7, "segments": 2,
	}
	for k, w := range want {
		g, ok := got[k].(float64)
		if !ok || math.Abs(g-w) > 1e-12*math.Max(1, math.Abs(w)) {
			t.Errorf("%s = %v, want %v", k, got[k], w)
		}
	}
	if got["steady"] != true {
		t.Errorf("steady = %v", got["steady"])
	}
	for _, k := range []string{"t", "speed_u95_m_s", "lift_n", "drag_n", "warnings"} {
		if _, ok := got[k]; !ok {
			t.Errorf("field %q missing", k)
		}
	}
}

// sseEvent is one parsed server-sent event.
type sseEvent struct{ id, name, data string }

// readEvents parses a text/event-stream body and sends each event on out
// until the body ends.
func readEvents(body io.Reader, out chan<- sseEvent) {
	defer close(out)
	br := bufio.NewReader(body)
	var ev sseEvent
	for {
		line, err := br.ReadString('\n')
		if err != nil {
			return
		}
		line = strings.TrimRight(line, "\n")
		switch {
		case line == "":
			if ev.name != "" || ev.data != "" {
				out <- ev
			}
			ev = sseEvent{}
		case strings.HasPrefix(line, "id: "):
			ev.id = line[4:]
		case strings.HasPrefix(line, "event: "):
			ev.name = line[7:]
		case strings.HasPrefix(line, "data: "):
			ev.data = line[6:]
		}
	}
}

// openStream connects to the live stream of a real HTTP server.
func openStream(t *testing.T, ctx context.Context, url string, lastID string) <-chan sseEvent {
	t.Helper()
	req, err := http.NewRequestWithContext(ctx, "GET", url+"/api/v1/stream", nil)
	if err != nil {
		t.Fatal(err)
	}
	if lastID != "" {
		req.Header.Set("Last-Event-ID", lastID)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { resp.Body.Close() })
	if resp.StatusCode != 200 || resp.Header.Get("Content-Type") != "text/event-stream" {
		t.Fatalf("stream: %d %q", resp.StatusCode, resp.Header.Get("Content-Type"))
	}
	out := make(chan sseEvent, 1024)
	go readEvents(resp.Body, out)
	return out
}

func next(t *testing.T, ch <-chan sseEvent) sseEvent {
	t.Helper()
	select {
	case ev, ok := <-ch:
		if !ok {
			t.Fatal("stream ended")
		}
		return ev
	case <-time.After(10 * time.Second): // safety net, not a timing assertion
		t.Fatal("no event within 10 s")
	}
	return sseEvent{}
}

func liveN(t *testing.T, ev sseEvent) int {
	t.Helper()
	var l struct{ N int }
	if ev.name != "live" || json.Unmarshal([]byte(ev.data), &l) != nil {
		t.Fatalf("not a live event: %+v", ev)
	}
	return l.N
}

// loopbackServer serves s.Handler() on 127.0.0.1 (httptest uses loopback).
func loopbackServer(t *testing.T, s *dashboard.Server) *httptest.Server {
	t.Helper()
	ts := httptest.NewServer(s.Handler())
	t.Cleanup(ts.Close)
	return ts
}

// Ensure that a client first gets the current state, then every live
// event in order, and that a reconnect with Last-Event-ID skips the
// segments it saw.
func TestStream_SnapshotAndOrder(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true, Addr: "127.0.0.1:0"}) // port unknown: httptest picks one
	ts := loopbackServer(t, s)
	s.SetRun(storage.Run{ID: 5, Rig: "strut-b", Kind: "foil", Status: storage.StatusRecording})
	s.PublishHealth(dashboard.Health{Sources: []acquire.HealthSnapshot{{Source: "balance", Frames: 10}}})
	s.PublishSegment(segment(0, 0, 0.02))
	s.PublishSegment(segment(1, 4, 0.43))
	s.PublishLive(liveSample(1, 0.4))

	ch := openStream(t, t.Context(), ts.URL, "")
	var names []string
	var segID string
	for range 6 {
		ev := next(t, ch)
		names = append(names, ev.name)
		if ev.name == "segment" {
			segID = ev.id
		}
	}
	if want := []string{"run", "history", "health", "live", "segment", "segment"}; !slices.Equal(names, want) {
		t.Fatalf("snapshot events %v, want %v", names, want)
	}
	// Bursts of 32, within the client's buffer; a client that falls further
	// behind is dropped by design (TestStream_SlowClientDropped).
	prevID := ""
	for i := 2; i <= 200; i += 32 {
		end := min(i+32, 201)
		for j := i; j < end; j++ {
			s.PublishLive(liveSample(j, 0.4))
		}
		for j := i; j < end; j++ {
			ev := next(t, ch)
			if n := liveN(t, ev); n != j {
				t.Fatalf("live event %d arrived as %d", j, n)
			}
			if ev.id == prevID || ev.id == "" {
				t.Fatalf("event id %q not new (previous %q)", ev.id, prevID)
			}
			prevID = ev.id
		}
	}
	if st := s.Stats(); st.Disconnected != 0 {
		t.Fatalf("stats %+v: a keeping-up client was dropped", st)
	}
	// Reconnect after the last segment: only the state comes again.
	s.PublishSegment(segment(2, 8, 0.81))
	ch2 := openStream(t, t.Context(), ts.URL, segID)
	names = names[:0]
	for range 5 {
		names = append(names, next(t, ch2).name)
	}
	if want := []string{"run", "history", "health", "live", "segment"}; !slices.Equal(names, want) {
		t.Fatalf("snapshot after Last-Event-ID: %v, want %v (one new segment)", names, want)
	}
}

// blockedWriter is a stalled client: its first Write blocks until release.
type blockedWriter struct {
	hdr     http.Header
	release chan struct{}
}

func (w *blockedWriter) Header() http.Header { return w.hdr }
func (w *blockedWriter) WriteHeader(int)     {}
func (w *blockedWriter) Write(p []byte) (int, error) {
	<-w.release
	return 0, errors.New("client gone")
}

// stall starts a stream request whose client never reads.
func stall(t *testing.T, s *dashboard.Server) {
	t.Helper()
	w := &blockedWriter{hdr: http.Header{}, release: make(chan struct{})}
	req := httptest.NewRequest("GET", "/api/v1/stream", nil)
	req.Host = "127.0.0.1:8470"
	done := make(chan struct{})
	go func() { defer close(done); s.Handler().ServeHTTP(w, req) }()
	t.Cleanup(func() { close(w.release); <-done })
}

// waitFor polls cond (a safety net of 10 s, not a timing assertion).
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(2 * time.Millisecond)
	}
}

// Ensure that a stalled client is disconnected and counted while a client
// that keeps up receives every event.
func TestStream_SlowClientDropped(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true, Addr: "127.0.0.1:0"})
	ts := loopbackServer(t, s)
	stall(t, s)
	fast := openStream(t, t.Context(), ts.URL, "")
	waitFor(t, "two subscribers", func() bool { return s.Stats().Subscribers == 2 })

	const total, batch = 640, 16 // well past the stalled client's buffer
	for i := 1; i <= total; i += batch {
		for j := i; j < i+batch; j++ {
			s.PublishLive(liveSample(j, 0.4))
		}
		for j := i; j < i+batch; j++ {
			if n := liveN(t, next(t, fast)); n != j {
				t.Fatalf("fast client got live %d, want %d", n, j)
			}
		}
	}
	st := s.Stats()
	if st.Disconnected != 1 || st.Subscribers != 1 {
		t.Fatalf("stats %+v, want the stalled client disconnected (1) and the fast one connected (1)", st)
	}
}

// Ensure that PublishLive never blocks: 10 000 events with stalled clients
// all return, and each stalled client is dropped once.
func TestPublishLive_NeverBlocks(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true})
	for range 3 {
		stall(t, s)
	}
	waitFor(t, "three subscribers", func() bool { return s.Stats().Subscribers == 3 })
	done := make(chan struct{})
	go func() {
		defer close(done)
		for i := range 10000 {
			s.PublishLive(liveSample(i, 0.4))
		}
	}()
	select {
	case <-done:
	case <-time.After(30 * time.Second): // safety net: a blocked producer never returns
		t.Fatal("PublishLive blocked on stalled clients")
	}
	if st := s.Stats(); st.Disconnected != 3 || st.Subscribers != 0 {
		t.Fatalf("stats %+v, want 3 disconnected, 0 connected", st)
	}
	// The latest estimate is still served.
	var l struct{ N int }
	json.Unmarshal(get(t, s.Handler(), "GET", "/api/v1/live", nil).Body.Bytes(), &l)
	if l.N != 9999 {
		t.Errorf("latest live n = %d, want 9999", l.N)
	}
}

// Ensure that Serve ends live streams and returns when its context ends.
func TestServe_Shutdown(t *testing.T) {
	s, _ := newServer(t, dashboard.Config{Live: true, Addr: "127.0.0.1:0"})
	ln := listen(t)
	ctx, cancel := context.WithCancel(context.Background())
	errc := make(chan error, 1)
	go func() { errc <- s.Serve(ctx, ln) }()
	url := "http://" + ln.Addr().String()
	ch := openStream(t, t.Context(), url, "")
	waitFor(t, "subscriber", func() bool { return s.Stats().Subscribers == 1 })
	// The Host check uses the listener's real port.
	resp, err := http.Get(url + "/api/v1/runs")
	if err != nil || resp.StatusCode != 200 {
		t.Fatalf("GET runs on served port: %v %v", resp, err)
	}
	resp.Body.Close()
	cancel()
	select {
	case err := <-errc:
		if err != nil {
			t.Fatalf("Serve: %v", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("Serve did not return after cancel")
	}
	for range ch { // the stream ends
	}
}

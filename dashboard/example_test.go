package dashboard_test

import (
	"encoding/json"
	"fmt"
	"log/slog"
	"math"
	"net/http/httptest"
	"time"

	"liftyard/calibrate"
	"liftyard/dashboard"
	"liftyard/estimate"
)

// A recorder publishes each moving-window estimate; the dashboard keeps the
// latest for the JSON API and streams it to open pages. Invented numbers
// from a scenario of our own: a strut towed at about 1.1 m/s.
func ExampleServer_PublishLive() {
	s, err := dashboard.New(dashboard.Config{Live: true, Logger: slog.New(slog.DiscardHandler)})
	if err != nil {
		panic(err)
	}
	exact := math.Inf(1)
	s.PublishLive(estimate.Live{
		T:        time.Date(2025, 6, 14, 9, 30, 0, 0, time.UTC),
		N:        2000,
		QPa:      calibrate.Value{X: 612.5, U: 1.5, Dof: exact},
		CL:       calibrate.Value{X: 0.43, U: 0.012, Dof: exact},
		Steady:   true,
		Segments: 3,
	})

	req := httptest.NewRequest("GET", "/api/v1/live", nil)
	req.Host = "127.0.0.1:8470"
	rec := httptest.NewRecorder()
	s.Handler().ServeHTTP(rec, req)

	var live struct {
		QPa    float64  `json:"q_pa"`
		CL     float64  `json:"cl"`
		CLU95  float64  `json:"cl_u95"`
		Speed  *float64 `json:"speed_m_s"`
		Steady bool     `json:"steady"`
	}
	json.Unmarshal(rec.Body.Bytes(), &live)
	fmt.Println(rec.Code, rec.Header().Get("Content-Type"))
	fmt.Printf("q = %.1f Pa, C_L = %.3f ± %.3f (U95), steady %v, speed measured: %v\n",
		live.QPa, live.CL, live.CLU95, live.Steady, live.Speed != nil)
	// Output:
	// 200 application/json
	// q = 612.5 Pa, C_L = 0.430 ± 0.024 (U95), steady true, speed measured: false
}

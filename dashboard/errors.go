package dashboard

import (
	"net/http"
	"net/http/httptest"
	"strconv"
	"strings"
)

// Pages answer an error with a page of their own — the navigation, what
// went wrong and where to go — not plain text; the JSON routes (/api/)
// answer {"error": "…"}.

// errorPageData is the content of the error page (error.html).
type errorPageData struct {
	Status  int
	Heading string
	Message string
	Retry   bool // a server fault: trying again may help
	Caps    caps
}

// errorHeadings name each status on the error page.
var errorHeadings = map[int]string{
	http.StatusBadRequest:          "The address is not right",
	http.StatusNotFound:            "Not found",
	http.StatusMethodNotAllowed:    "Not allowed here",
	http.StatusInternalServerError: "Something went wrong",
}

// errorPage answers status with the styled error page saying msg. If the
// page itself cannot be rendered it falls back to plain text.
func (s *Server) errorPage(w http.ResponseWriter, r *http.Request, status int, msg string) {
	heading, ok := errorHeadings[status]
	if !ok {
		heading = http.StatusText(status)
	}
	data := pageData{Title: heading, Nav: "", Token: !s.loopback.Load(),
		Content: errorPageData{Status: status, Heading: heading, Message: msg, Retry: status >= 500, Caps: s.caps()}}
	if err := s.writePage(w, s.pages.err, status, data); err != nil {
		s.log.Error("render error page", "err", err)
		http.Error(w, msg, status)
	}
}

// withErrorPages puts the error page on the mux's own answers (no route
// for the path: 404; a route for another method: 405); JSON under /api/.
func (s *Server) withErrorPages(mux *http.ServeMux) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		h, pattern := mux.Handler(r)
		if pattern != "" {
			mux.ServeHTTP(w, r)
			return
		}
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, r)
		status, msg := rec.Code, ""
		switch status {
		case http.StatusNotFound:
			msg = "there is no page at " + strconv.Quote(r.URL.Path) + " on this dashboard"
		case http.StatusMethodNotAllowed:
			msg = r.Method + " is not allowed at " + strconv.Quote(r.URL.Path)
			w.Header().Set("Allow", rec.Header().Get("Allow"))
		default: // a redirect to the clean path
			for k, v := range rec.Header() {
				w.Header()[k] = v
			}
			w.WriteHeader(status)
			w.Write(rec.Body.Bytes())
			return
		}
		if strings.HasPrefix(r.URL.Path, "/api/") {
			writeJSONStatus(w, status, map[string]string{"error": msg})
			return
		}
		s.errorPage(w, r, status, msg)
	})
}

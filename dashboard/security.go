package dashboard

import (
	"crypto/subtle"
	"net"
	"net/http"
	"strconv"
	"strings"
)

// tokenCookie is the cookie that carries the token after /?token=... .
const tokenCookie = "token"

// secure wraps next with the checks of docs/design.md §5, outermost first:
//
//  1. Host check on loopback (DNS rebinding): only 127.0.0.1, localhost and
//     [::1] with our port.
//  2. Token off loopback: "Authorization: Bearer" or the token cookie;
//     ?token= on a GET sets the cookie and redirects to the same path.
//  3. Cross-origin protection for non-safe methods (POST).
//  4. Response headers that keep pages from being framed or sniffed and
//     keep the token out of Referer headers.
func (s *Server) secure(next http.Handler) http.Handler {
	cop := http.NewCrossOriginProtection()
	inner := cop.Handler(next)
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		h := w.Header()
		h.Set("X-Content-Type-Options", "nosniff")
		h.Set("Referrer-Policy", "no-referrer")
		h.Set("X-Frame-Options", "DENY")
		if s.loopback.Load() {
			if !s.hostAllowed(r.Host) {
				http.Error(w, "dashboard: Host "+strconv.Quote(r.Host)+" not allowed; open the dashboard at http://127.0.0.1:"+strconv.FormatInt(s.port.Load(), 10)+"/", http.StatusForbidden)
				return
			}
			inner.ServeHTTP(w, r)
			return
		}
		if q := r.URL.Query().Get("token"); q != "" && r.Method == http.MethodGet {
			if !s.tokenOK(q) {
				s.unauthorized(w)
				return
			}
			http.SetCookie(w, &http.Cookie{
				Name: tokenCookie, Value: q, Path: "/",
				HttpOnly: true, SameSite: http.SameSiteLaxMode, Secure: r.TLS != nil,
			})
			u := *r.URL
			qs := u.Query()
			qs.Del("token")
			u.RawQuery = qs.Encode()
			http.Redirect(w, r, u.RequestURI(), http.StatusSeeOther)
			return
		}
		if !s.authorized(r) {
			s.unauthorized(w)
			return
		}
		inner.ServeHTTP(w, r)
	})
}

// hostAllowed reports whether a request's Host names this loopback server.
func (s *Server) hostAllowed(hostport string) bool {
	host, port, err := net.SplitHostPort(hostport)
	if err != nil {
		// No port in Host: the default port of the scheme.
		host, port = strings.Trim(hostport, "[]"), "80"
	}
	switch host {
	case "127.0.0.1", "localhost", "::1":
	default:
		return false
	}
	want := s.port.Load()
	if want == 0 { // port not known yet (Handler used before Serve on ":0")
		return true
	}
	return port == strconv.FormatInt(want, 10)
}

// authorized reports whether r carries the token.
func (s *Server) authorized(r *http.Request) bool {
	if a := r.Header.Get("Authorization"); a != "" {
		scheme, tok, ok := strings.Cut(a, " ")
		return ok && strings.EqualFold(scheme, "Bearer") && s.tokenOK(strings.TrimSpace(tok))
	}
	if c, err := r.Cookie(tokenCookie); err == nil {
		return s.tokenOK(c.Value)
	}
	return false
}

// tokenOK compares in constant time, so response timing does not reveal
// how much of a guess was right.
func (s *Server) tokenOK(got string) bool {
	return s.token != "" && subtle.ConstantTimeCompare([]byte(got), []byte(s.token)) == 1
}

func (s *Server) unauthorized(w http.ResponseWriter) {
	w.Header().Set("WWW-Authenticate", `Bearer realm="liftyard"`)
	http.Error(w, "dashboard: token required; open /?token=YOUR_TOKEN once or send \"Authorization: Bearer YOUR_TOKEN\"", http.StatusUnauthorized)
}

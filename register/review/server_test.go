package review

import (
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
)

// The guard lets the page's own requests through and refuses what another
// site could make a browser send.
func TestGuard(t *testing.T) {
	h := guard(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) { w.WriteHeader(http.StatusOK) }))
	for _, tc := range []struct {
		name, method, host, origin, ctype string
		want                              int
	}{
		{"page", "GET", "127.0.0.1:8765", "", "", http.StatusOK},
		{"localhost", "GET", "localhost:8765", "", "", http.StatusOK},
		{"ipv6", "GET", "[::1]:8765", "", "", http.StatusOK},
		{"a name that resolves here", "GET", "evil.example:8765", "", "", http.StatusForbidden},
		{"decision", "POST", "127.0.0.1:8765", "http://127.0.0.1:8765", "application/json", http.StatusOK},
		{"decision from another origin", "POST", "127.0.0.1:8765", "http://evil.example", "application/json", http.StatusForbidden},
		{"decision as a form", "POST", "127.0.0.1:8765", "", "text/plain", http.StatusUnsupportedMediaType},
	} {
		r := httptest.NewRequest(tc.method, "http://"+tc.host+"/api/decide", strings.NewReader("{}"))
		r.Host = tc.host
		if tc.origin != "" {
			r.Header.Set("Origin", tc.origin)
		}
		if tc.ctype != "" {
			r.Header.Set("Content-Type", tc.ctype)
		}
		w := httptest.NewRecorder()
		h.ServeHTTP(w, r)
		if w.Code != tc.want {
			t.Errorf("%s: status %d, want %d", tc.name, w.Code, tc.want)
		}
		if tc.want == http.StatusOK && !strings.Contains(w.Header().Get("Content-Security-Policy"), "default-src 'self'") {
			t.Errorf("%s: no Content-Security-Policy", tc.name)
		}
	}
}

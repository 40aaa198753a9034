package review

import (
	"context"
	"embed"
	"encoding/json"
	"errors"
	"io/fs"
	"net"
	"net/http"
	"strconv"
	"strings"
	"time"

	"ferry/landmarks"
)

//go:embed web
var webFiles embed.FS

// Handler serves the page, its scripts and the review's API:
//
//	GET  /                       the page
//	GET  /static/…               its script and style sheet
//	GET  /api/state              State as JSON
//	GET  /api/cell?k=N           CellView of place N as JSON
//	GET  /api/panel?k=N&name=P   panel P of place N as PNG
//	POST /api/decide             {"id", "decision": accepted|none|"", "candidate", "note"}
//
// Every response forbids the page to load anything from elsewhere
// (Content-Security-Policy).
func (s *Session) Handler() http.Handler {
	mux := http.NewServeMux()
	static, _ := fs.Sub(webFiles, "web")
	mux.Handle("GET /static/", http.StripPrefix("/static/", http.FileServer(http.FS(static))))
	mux.HandleFunc("GET /{$}", func(w http.ResponseWriter, r *http.Request) {
		page, err := fs.ReadFile(static, "index.html")
		if err != nil {
			http.Error(w, err.Error(), http.StatusInternalServerError)
			return
		}
		w.Header().Set("Content-Type", "text/html; charset=utf-8")
		w.Write(page)
	})
	mux.HandleFunc("GET /api/state", func(w http.ResponseWriter, r *http.Request) {
		writeJSON(w, s.State())
	})
	mux.HandleFunc("GET /api/cell", func(w http.ResponseWriter, r *http.Request) {
		k, err := strconv.Atoi(r.URL.Query().Get("k"))
		if err != nil {
			http.Error(w, "k: want a place in the order", http.StatusBadRequest)
			return
		}
		v, err := s.Cell(k)
		if err != nil {
			http.Error(w, err.Error(), http.StatusNotFound)
			return
		}
		writeJSON(w, v)
	})
	mux.HandleFunc("GET /api/panel", func(w http.ResponseWriter, r *http.Request) {
		k, err := strconv.Atoi(r.URL.Query().Get("k"))
		if err != nil {
			http.Error(w, "k: want a place in the order", http.StatusBadRequest)
			return
		}
		img, err := s.Panel(k, r.URL.Query().Get("name"))
		if err != nil {
			http.Error(w, err.Error(), http.StatusNotFound)
			return
		}
		w.Header().Set("Content-Type", "image/png")
		// A place shows another cell in a review of other files on the
		// same port: never reuse an image.
		w.Header().Set("Cache-Control", "no-store")
		w.Write(img)
	})
	mux.HandleFunc("POST /api/decide", func(w http.ResponseWriter, r *http.Request) {
		var req struct {
			ID, Decision, Candidate, Note string
		}
		if err := json.NewDecoder(http.MaxBytesReader(w, r.Body, 1<<16)).Decode(&req); err != nil {
			http.Error(w, "want a JSON object: "+err.Error(), http.StatusBadRequest)
			return
		}
		// A closed tab must not stop the file from being written.
		ctx := context.WithoutCancel(r.Context())
		if err := s.Decide(ctx, req.ID, landmarks.Verdict(req.Decision), req.Candidate, req.Note); err != nil {
			http.Error(w, err.Error(), http.StatusConflict)
			return
		}
		writeJSON(w, s.State())
	})
	return guard(mux)
}

// guard sets the headers that keep the page to its own server, and refuses
// requests that another site could have made the browser send: a Host that
// is not a numeric address or localhost (a name of someone else's that
// resolves to this machine), and a decision that is not JSON (which a form
// on another page cannot send without the browser asking first) or comes
// from another origin.
func guard(h http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		host, _, err := net.SplitHostPort(r.Host)
		if err != nil {
			host = r.Host
		}
		if net.ParseIP(strings.Trim(host, "[]")) == nil && host != "localhost" {
			http.Error(w, "review answers requests to its numeric address or localhost only", http.StatusForbidden)
			return
		}
		if r.Method == http.MethodPost {
			if origin := r.Header.Get("Origin"); origin != "" && origin != "http://"+r.Host {
				http.Error(w, "a decision from another origin", http.StatusForbidden)
				return
			}
			if ct := r.Header.Get("Content-Type"); !strings.HasPrefix(ct, "application/json") {
				http.Error(w, "want Content-Type application/json", http.StatusUnsupportedMediaType)
				return
			}
		}
		w.Header().Set("Content-Security-Policy", "default-src 'self'; img-src 'self'; connect-src 'self'; style-src 'self'; script-src 'self'; base-uri 'none'; form-action 'none'")
		w.Header().Set("X-Content-Type-Options", "nosniff")
		h.ServeHTTP(w, r)
	})
}

func writeJSON(w http.ResponseWriter, v any) {
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	json.NewEncoder(w).Encode(v)
}

// Serve serves the session on ln until ctx is done, then shuts the server
// down, letting a decision being written finish. Every decision is on disk
// when it returns.
func Serve(ctx context.Context, ln net.Listener, s *Session) error {
	srv := &http.Server{Handler: s.Handler(), ReadHeaderTimeout: 10 * time.Second}
	done := make(chan error, 1)
	go func() { done <- srv.Serve(ln) }()
	select {
	case err := <-done:
		return err
	case <-ctx.Done():
	}
	shut, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	err := srv.Shutdown(shut)
	if e := <-done; !errors.Is(e, http.ErrServerClosed) && err == nil {
		err = e
	}
	return err
}

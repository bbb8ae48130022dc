package web

import (
	"context"
	"net/http"
	"strings"

	"cohortdesk/db"
)

// standbyStore is what the web layer needs to route reads to a standby.
type standbyStore interface {
	Standby() *db.Standby
	PrimaryPosition(ctx context.Context) (string, error)
}

// sessionWroteKey is the session's record of the primary's WAL position
// after the person's last change: their reads wait for the standby to
// replay it, so everyone sees their own change at once.
const sessionWroteKey = "wrote"

// withReads prepares each request for the store. A request that only reads
// (GET, HEAD) reads the study's settings, sites and active protocol once. A
// request that may change something, when reads can go to a standby, keeps
// the primary's WAL position in the session just before it answers (its
// changes are committed by then), so the person's next pages are read from
// the primary until the standby has replayed them.
func (s *Server) withReads(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if r.Method == http.MethodGet || r.Method == http.MethodHead {
			next.ServeHTTP(w, r.WithContext(db.WithReadMemo(r.Context())))
			return
		}
		if s.store.Standby() == nil {
			next.ServeHTTP(w, r)
			return
		}
		next.ServeHTTP(&wroteWriter{ResponseWriter: w, note: func() {
			if lsn, err := s.store.PrimaryPosition(r.Context()); err == nil {
				s.sessions.Put(r.Context(), sessionWroteKey, lsn)
			}
		}}, r)
	})
}

// wroteWriter calls note once, before the answer starts.
type wroteWriter struct {
	http.ResponseWriter
	note  func()
	noted bool
}

func (w *wroteWriter) before() {
	if !w.noted {
		w.noted = true
		w.note()
	}
}

func (w *wroteWriter) WriteHeader(code int) { w.before(); w.ResponseWriter.WriteHeader(code) }

func (w *wroteWriter) Write(b []byte) (int, error) { w.before(); return w.ResponseWriter.Write(b) }

func (w *wroteWriter) Unwrap() http.ResponseWriter { return w.ResponseWriter }

// fromStandby lets a page that only reads be read from the standby. When the
// standby goes away while the page is being read, and nothing has been
// written to the answer yet, the page is read again from the primary: the
// person sees their page, not an error. Downloads (CSV, zip, PDF) stream as
// they read, so they are always read from the primary.
func (s *Server) fromStandby(pattern string, h appHandler) appHandler {
	for _, ext := range []string{".csv", ".zip", ".pdf"} {
		if strings.HasSuffix(pattern, ext) {
			return h
		}
	}
	return func(w http.ResponseWriter, r *http.Request) error {
		if s.store.Standby() == nil {
			return h(w, r)
		}
		after := s.sessions.GetString(r.Context(), sessionWroteKey)
		ww := &watchWriter{ResponseWriter: w}
		err := h(ww, r.WithContext(db.ReadFromStandby(r.Context(), after)))
		if err != nil && !ww.wrote && db.StandbyGone(err) {
			return h(w, r)
		}
		return err
	}
}

// watchWriter notes whether anything was written.
type watchWriter struct {
	http.ResponseWriter
	wrote bool
}

func (w *watchWriter) WriteHeader(code int) { w.wrote = true; w.ResponseWriter.WriteHeader(code) }

func (w *watchWriter) Write(b []byte) (int, error) { w.wrote = true; return w.ResponseWriter.Write(b) }

func (w *watchWriter) Unwrap() http.ResponseWriter { return w.ResponseWriter }

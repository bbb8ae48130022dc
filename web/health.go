package web

import (
	"context"
	"net/http"
)

type healthStore interface {
	Ping(ctx context.Context) error
}

// health answers 200 while the process runs: for restarts by a supervisor.
func (s *Server) health(w http.ResponseWriter, r *http.Request) error {
	w.Header().Set("Content-Type", "text/plain; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	_, err := w.Write([]byte("ok\n"))
	return err
}

// ready answers 200 when the database answers, else 503: for load balancers.
func (s *Server) ready(w http.ResponseWriter, r *http.Request) error {
	w.Header().Set("Content-Type", "text/plain; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	if err := s.store.Ping(r.Context()); err != nil {
		s.log.Warn("not ready", "err", err)
		w.WriteHeader(http.StatusServiceUnavailable)
		_, _ = w.Write([]byte("database unreachable\n"))
		return nil
	}
	_, err := w.Write([]byte("ready\n"))
	return err
}

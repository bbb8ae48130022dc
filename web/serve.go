package web

import (
	"context"
	"errors"
	"net"
	"net/http"
	"time"
)

// NewHTTPServer returns an http.Server with timeouts suitable for the app.
func NewHTTPServer(addr string, h http.Handler) *http.Server {
	return &http.Server{
		Addr:              addr,
		Handler:           h,
		ReadHeaderTimeout: 10 * time.Second,
		// No ReadTimeout for the whole server: each route's body gets its own
		// deadline (withReadDeadlines: sign-in seconds, uploads minutes).
		WriteTimeout:   10 * time.Minute, // large exports
		IdleTimeout:    2 * time.Minute,
		MaxHeaderBytes: 64 << 10,
	}
}

func serve(ctx context.Context, srv *http.Server, cert, key string, ready func(addr string)) error {
	ln, err := net.Listen("tcp", srv.Addr)
	if err != nil {
		return err
	}
	if ready != nil {
		ready(ln.Addr().String())
	}
	errc := make(chan error, 1)
	go func() {
		if cert != "" {
			errc <- srv.ServeTLS(ln, cert, key)
			return
		}
		errc <- srv.Serve(ln)
	}()
	select {
	case err := <-errc:
		return err
	case <-ctx.Done():
	}
	sctx, cancel := context.WithTimeout(context.Background(), shutdownTimeout)
	defer cancel()
	if err := srv.Shutdown(sctx); err != nil {
		return err
	}
	if err := <-errc; err != nil && !errors.Is(err, http.ErrServerClosed) {
		return err
	}
	return nil
}

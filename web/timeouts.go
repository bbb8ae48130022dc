package web

import (
	"io"
	"net/http"
	"sync"
	"time"

	"github.com/go-chi/chi/v5"
)

// Read timeouts per route: how long a request's body may take to arrive.
// The server as a whole only bounds the headers (ReadHeaderTimeout); the
// body's deadline is set here by the route, so a slow client can hold a
// sign-in for seconds and an upload for minutes, not everything for half an
// hour.
const (
	readSignIn  = 10 * time.Second // the sign-in forms: a few hundred bytes
	readUpload  = 30 * time.Minute // files: gigabytes over a slow line
	readDefault = time.Minute      // every other form
)

// readTimeouts are the routes whose bodies get other than readDefault.
var readTimeouts = map[string]time.Duration{
	"POST /signin":                readSignIn,
	"POST /signin/code":           readSignIn,
	"POST /imports":               readUpload,
	"POST /screening/external":    readUpload,
	"POST /cases/{id}/recordings": readUpload,
}

// readTimeout is the body deadline of a request to the route pattern.
func readTimeout(method, pattern string) time.Duration {
	if d, ok := readTimeouts[method+" "+pattern]; ok {
		return d
	}
	return readDefault
}

// withReadDeadlines sets the read deadline of each request that has a body,
// by its route, and lifts it once the body has been read whole, so that a
// handler still working afterwards is not cut off.
func (s *Server) withReadDeadlines(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if r.Body == nil || r.Body == http.NoBody || r.ContentLength == 0 {
			next.ServeHTTP(w, r)
			return
		}
		pattern := s.router.Find(chi.NewRouteContext(), r.Method, r.URL.Path)
		rc := http.NewResponseController(w)
		if err := rc.SetReadDeadline(time.Now().Add(readTimeout(r.Method, pattern))); err == nil {
			r.Body = &deadlineBody{ReadCloser: r.Body, lift: func() { _ = rc.SetReadDeadline(time.Time{}) }}
		}
		next.ServeHTTP(w, r)
	})
}

// deadlineBody lifts the read deadline when the body ends.
type deadlineBody struct {
	io.ReadCloser
	once sync.Once
	lift func()
}

func (d *deadlineBody) Read(p []byte) (int, error) {
	n, err := d.ReadCloser.Read(p)
	if err == io.EOF {
		d.once.Do(d.lift)
	}
	return n, err
}

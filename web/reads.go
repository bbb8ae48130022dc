package web

import (
	"net/http"

	"cohortdesk/db"
)

// withReads marks requests that only read (GET and HEAD) so the store reads
// the study's settings, sites and active protocol once per request.
func withReads(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if r.Method == http.MethodGet || r.Method == http.MethodHead {
			r = r.WithContext(db.WithReadMemo(r.Context()))
		}
		next.ServeHTTP(w, r)
	})
}

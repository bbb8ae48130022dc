package web

import (
	"net/http"
	"strconv"
	"strings"

	"github.com/go-chi/chi/v5"
)

// idParam reads the {id} path parameter of a route. Anything but a positive
// whole number is "not found", the same answer as an id nobody stored, so a
// tampered address learns nothing.
func idParam(r *http.Request) (int64, error) {
	id, err := strconv.ParseInt(chi.URLParam(r, "id"), 10, 64)
	if err != nil || id <= 0 {
		return 0, errNotFound
	}
	return id, nil
}

// urlParam reads another path parameter of a route.
func urlParam(r *http.Request, name string) string { return chi.URLParam(r, name) }

// safeBack keeps a return address on this site.
func safeBack(v, fallback string) string {
	if !strings.HasPrefix(v, "/") || strings.HasPrefix(v, "//") || strings.Contains(v, `\`) {
		return fallback
	}
	return v
}

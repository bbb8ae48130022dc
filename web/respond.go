package web

import (
	"context"
	"errors"
	"log/slog"
	"net/http"
	"slices"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/views"

	"github.com/a-h/templ"
)

// appHandler is a handler that returns its failure instead of writing it, so
// one place (serveError) chooses the status and the page.
type appHandler func(w http.ResponseWriter, r *http.Request) error

// statusOf maps domain errors to HTTP statuses.
func statusOf(err error) int {
	var ve *cohort.ValidationError
	var qe *queryError
	switch {
	case errors.As(err, &qe):
		return http.StatusBadRequest
	case errors.As(err, &ve):
		return http.StatusUnprocessableEntity
	case errors.Is(err, cohort.ErrNotFound):
		return http.StatusNotFound
	case errors.Is(err, cohort.ErrConflict):
		return http.StatusConflict
	case errors.Is(err, cohort.ErrForbidden):
		return http.StatusForbidden
	case errors.Is(err, db.ErrUnavailable):
		return http.StatusServiceUnavailable
	case errors.Is(err, context.Canceled):
		return 499 // the client went away; nothing to show
	case errors.Is(err, errPayloadTooLarge):
		return http.StatusRequestEntityTooLarge
	case errors.Is(err, errBusyUploads):
		return http.StatusTooManyRequests
	}
	return http.StatusInternalServerError
}

var (
	errPayloadTooLarge = errors.New("upload too large")
	errBusyUploads     = errors.New("too many uploads in progress")
)

// wrap turns an appHandler into an http.Handler.
func (s *Server) wrap(h appHandler) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		if err := checkRawQuery(r); err != nil {
			s.serveError(w, r, err)
			return
		}
		if err := h(w, r); err != nil {
			s.serveError(w, r, err)
		}
	}
}

// serveError writes the page for err. Only server faults are logged as errors;
// everything else is the user's input or permissions and is logged at info.
func (s *Server) serveError(w http.ResponseWriter, r *http.Request, err error) {
	status := statusOf(err)
	id := requestID(r.Context())
	if status == 499 {
		return
	}
	if status >= 500 && status != http.StatusServiceUnavailable {
		s.log.Error("request failed", "request_id", id, "method", r.Method, "path", r.URL.Path, "err", err)
	} else {
		s.log.Info("request refused", "request_id", id, "status", status, "err", err)
	}
	m := views.ErrorModel{Page: s.page(r, "", ""), Status: status, RequestID: id}
	switch status {
	case http.StatusNotFound:
		m.Heading, m.Message = "Not found", "There is nothing at this address, or it is not open to your role."
	case http.StatusForbidden:
		m.Heading, m.Message = "Not allowed", "Your role does not allow this page or action. Ask a study administrator if you need it."
	case http.StatusConflict:
		m.Heading, m.Message = "Changed by someone else", publicMessage(err, "Someone changed this record after you opened it. Reload the page to see the current version, then make your change again.")
	case http.StatusUnprocessableEntity:
		m.Heading, m.Message = "Please check the input", publicMessage(err, "Some of the input could not be used.")
	case http.StatusBadRequest:
		m.Heading, m.Message = "This address cannot be used", publicMessage(err, "The address holds values this page cannot use.")
	case http.StatusServiceUnavailable:
		m.Heading, m.Message = "The database cannot take changes right now", "Nothing was changed. The database is read-only, full or unreachable; try again shortly and tell the study's technical contact if it persists."
	case http.StatusRequestEntityTooLarge:
		m.Heading, m.Message = "Upload too large", publicMessage(err, "The file is larger than this server accepts.")
	case http.StatusTooManyRequests:
		m.Heading, m.Message = "Too many uploads at once", publicMessage(err, "Wait until your other uploads have finished.")
	default:
		m.Heading, m.Message = "Something went wrong", "The server could not finish this request. Nothing was half-saved: each change is all or nothing. The reference below helps the technical contact find the cause."
	}
	m.Page.Title = m.Heading
	w.Header().Set("Cache-Control", "no-store")
	s.render(w, r, status, views.ErrorPage(m))
}

// publicMessage returns the user-safe text carried by validation and conflict
// errors, else the fallback.
func publicMessage(err error, fallback string) string {
	var qe *queryError
	if errors.As(err, &qe) {
		return "The address holds values this page cannot use: " + qe.list() +
			". Go back to the page and choose again, or start from its first page."
	}
	var ve *cohort.ValidationError
	if errors.As(err, &ve) {
		return ve.Error()
	}
	var ce *cohort.ConflictError
	if errors.As(err, &ce) {
		return ce.Message
	}
	var pe *cohort.PublicError
	if errors.As(err, &pe) {
		return pe.Message
	}
	return fallback
}

// render writes a component with a status.
func (s *Server) render(w http.ResponseWriter, r *http.Request, status int, c templ.Component) {
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.WriteHeader(status)
	if err := c.Render(r.Context(), w); err != nil && !errors.Is(err, context.Canceled) {
		s.log.Error("render failed", "request_id", requestID(r.Context()), "err", err)
	}
}

// ok renders a page with status 200.
func (s *Server) ok(w http.ResponseWriter, r *http.Request, c templ.Component) error {
	s.render(w, r, http.StatusOK, c)
	return nil
}

// logger is the part of slog the server uses; tests pass a discard logger.
type logger = *slog.Logger

// humanMessage is the user-safe text of an error; for invalid input the
// field messages themselves, without the field names.
func humanMessage(err error) string {
	var ve *cohort.ValidationError
	if errors.As(err, &ve) {
		keys := make([]string, 0, len(ve.Fields))
		for k := range ve.Fields {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		var msgs []string
		for _, k := range keys {
			if m := ve.Fields[k]; !slices.Contains(msgs, m) && !(k == "cases" && len(keys) > 1) {
				msgs = append(msgs, m)
			}
		}
		return strings.Join(msgs, "; ")
	}
	return publicMessage(err, "The action could not be completed.")
}

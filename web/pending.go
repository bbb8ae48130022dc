package web

import (
	"net/http"

	"cohortdesk/views"
)

// progressCascade adds the screening cascade to the progress page.
func (s *Server) progressCascade(r *http.Request, m *views.ProgressModel) {}

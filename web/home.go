package web

import (
	"context"
	"fmt"
	"net/http"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/views"
)

type homeStore interface {
	Counts(ctx context.Context) (db.Counts, error)
	StudyName(ctx context.Context) (string, error)
}

var errNotFound = fmt.Errorf("web: %w", cohort.ErrNotFound)

// home shows the study's headline figures.
func (s *Server) home(w http.ResponseWriter, r *http.Request) error {
	c, err := s.store.Counts(r.Context())
	if err != nil {
		return err
	}
	m := views.HomeModel{
		Page: s.page(r, "Overview", "home"),
		AsOf: "at " + s.now().UTC().Format("2006-01-02 15:04 UTC"),
		Tiles: []views.Tile{
			{Key: "participants", Label: "participants enrolled", Value: c.Participants},
			{Key: "active", Label: "active (not withdrawn)", Value: c.Active},
			{Key: "withdrawn", Label: "withdrawn", Value: c.Withdrawn},
			{Key: "sites", Label: "sites", Value: c.Sites},
		},
	}
	return s.ok(w, r, views.Home(m))
}

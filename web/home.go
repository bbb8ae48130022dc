package web

import (
	"context"
	"fmt"
	"net/http"
	"net/url"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
	"cohortdesk/views"
)

type homeStore interface {
	Counts(ctx context.Context) (db.Counts, error)
	StudyName(ctx context.Context) (string, error)
}

var errNotFound = fmt.Errorf("web: %w", cohort.ErrNotFound)

// home shows the study's headline figures, the day's follow-up work as the
// triage page counts it (for roles that work cases), the cases by state and
// the latest import (for roles that import).
func (s *Server) home(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	c, err := s.store.Counts(ctx)
	if err != nil {
		return err
	}
	m := views.HomeModel{
		Page:  s.page(r, "Overview", "home"),
		AsOf:  "at " + when(s.now(), s.studyZone(ctx)),
		Tiles: []views.Tile{{Key: "participants", Label: cohort.Noun(c.Participants, "participant") + " enrolled", Value: c.Participants}},
	}
	list := s.may(r, "/cases")
	for _, st := range cohort.ParticipantStatuses() {
		t := views.Tile{Key: string(st), Label: cohort.Noun(c.Status[st], "participant") + " " + st.Label(), Value: c.Status[st]}
		if s.may(r, "/participants") {
			t.Href = "/participants?status=" + string(st)
		}
		m.Tiles = append(m.Tiles, t)
	}
	m.Tiles = append(m.Tiles, views.Tile{Key: "sites", Label: cohort.Noun(c.Sites, "site"), Value: c.Sites})
	waiting := views.Tile{Key: "awaiting-read", Label: cohort.Noun(int64(c.AwaitingRead), "recording") + " waiting for an over-read", Value: int64(c.AwaitingRead)}
	if s.may(r, "/confirmations") {
		waiting.Href = "/confirmations"
	}
	m.Tiles = append(m.Tiles, waiting)
	if s.may(r, "/triage") {
		u, _ := userFrom(ctx)
		t, err := s.store.Triage(ctx, 1, u.ID)
		if err != nil {
			return err
		}
		for _, g := range triageGroups {
			m.Work = append(m.Work, views.Tile{Key: "work-" + g.key, Label: g.tile, Value: int64(t.Counts[g.bucket]), Href: "/triage#group-" + g.key})
		}
		other := int64(t.Counts[followup.BucketOther])
		m.Work = append(m.Work, views.Tile{Key: "work-scheduled", Label: "other " + cohort.Noun(other, "case") + ", on schedule", Value: other, Href: "/cases"})
		m.WorkNote = fmt.Sprintf("As of %s, %s (%s); the triage page lists them in order of urgency.",
			dayLabel(t.Settings.Calendar().DateOf(t.Now)), cohort.ClockLabel(t.Now, t.Settings.Location()), t.Settings.Location())
	}
	for _, st := range followup.States() {
		n := c.Cases[st]
		if n == 0 {
			continue
		}
		row := views.CaseStateCount{Key: string(st), Label: st.Label(), Tone: stateTone(st), Count: n}
		if list {
			row.Href = "/cases?state=" + url.QueryEscape(string(st))
		}
		m.Cases = append(m.Cases, row)
	}
	if s.may(r, "/imports/{id}") {
		imps, err := s.store.Imports(ctx, 1)
		if err != nil {
			return err
		}
		if len(imps) > 0 {
			rep := imps[0]
			loc := s.studyZone(ctx)
			at := "started " + when(rep.StartedAt, loc)
			if rep.FinishedAt != nil {
				at = "finished " + when(*rep.FinishedAt, loc)
			}
			status, tone := importOutcome(rep.Status, rep.Accepted, rep.Rejected, rep.Duplicates)
			m.LastImport = &views.ImportSummary{Href: fmt.Sprintf("/imports/%d", rep.ID), File: rep.FileName, Status: status,
				Tone: tone, When: at, Accepted: rep.Accepted, Rejected: rep.Rejected}
		}
	}
	return s.ok(w, r, views.Home(m))
}

package db_test

import (
	"context"
	"fmt"
	"os"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

func TestMain(m *testing.M) {
	if os.Getenv(childEnv) != "" {
		// The child process of the kill test uses its parent's database.
		os.Exit(m.Run())
	}
	dbtest.Main(m)
}

// fixedNow is the clock of store tests.
var fixedNow = time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)

func newStore(t *testing.T) *db.Store {
	t.Helper()
	return db.New(dbtest.Pool(t), func() time.Time { return fixedNow })
}

func mustExec(t *testing.T, s *db.Store, sql string, args ...any) {
	t.Helper()
	if _, err := s.Pool().Exec(context.Background(), sql, args...); err != nil {
		t.Fatalf("%s: %v", sql, err)
	}
	// A write by bare SQL leaves its participants' kept figures to the
	// background pass the server runs; tests run that pass at once.
	drainFigures(t, s)
}

// drainFigures computes every kept figure left waiting, as the server's
// background pass does.
func drainFigures(t *testing.T, s *db.Store) {
	t.Helper()
	for {
		n, err := s.DrainFigures(context.Background(), 1000)
		if err != nil {
			t.Fatalf("drain figures: %v", err)
		}
		if n == 0 {
			return
		}
	}
}

// seedParticipants inserts n participants over two sites with a spread of
// enrolment dates that repeat (to exercise ties in the sort key).
func seedParticipants(t *testing.T, s *db.Store, n int) {
	t.Helper()
	mustExec(t, s, `INSERT INTO sites (code, name) VALUES ('AA', 'Site A'), ('BB', 'Site B')`)
	mustExec(t, s, `
		INSERT INTO participants (study_id, site_id, time_zone, enrolled_on, withdrawn_on)
		SELECT 'S' || lpad(g::text, 6, '0'), 1 + g % 2, 'UTC', date '2026-01-01' + (g % 37),
		       CASE WHEN g % 10 = 0 THEN date '2026-05-01' END
		FROM generate_series(1, $1) g`, n)
	mustExec(t, s, `INSERT INTO participant_identity (participant_id, given_name, family_name)
		SELECT id, 'Given' || id, 'Family' || id FROM participants`)
}

func TestParticipantsKeysetPaginationOrderAndStability(t *testing.T) {
	s := newStore(t)
	seedParticipants(t, s, 1234)
	ctx := context.Background()
	for _, c := range []struct {
		sort string
		desc bool
	}{{"study_id", false}, {"study_id", true}, {"enrolled", false}, {"enrolled", true}, {"site", false}, {"site", true}} {
		t.Run(fmt.Sprint(c.sort, c.desc), func(t *testing.T) {
			f := db.ParticipantFilter{Sort: c.sort, Desc: c.desc, Limit: 100}
			seen := map[int64]bool{}
			var prevKey string
			pages := 0
			for {
				page, err := s.Participants(ctx, f)
				if err != nil {
					t.Fatal(err)
				}
				if page.Total != 1234 {
					t.Fatalf("total %d", page.Total)
				}
				pages++
				for _, r := range page.Rows {
					if seen[r.ID] {
						t.Fatalf("participant %d on two pages", r.ID)
					}
					seen[r.ID] = true
					key := sortKeyOf(r, c.sort)
					if prevKey != "" && ((!c.desc && key < prevKey) || (c.desc && key > prevKey)) {
						t.Fatalf("order broken: %q after %q", key, prevKey)
					}
					prevKey = key
				}
				if page.Next == "" {
					break
				}
				f.After = page.Next
				// A participant enrolled meanwhile at the very start of the order
				// must not shift the rest of the pages.
				if pages == 3 {
					mustExec(t, s, `INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) VALUES ('A000000', 1, 'UTC', '2025-12-01')`)
					mustExec(t, s, `DELETE FROM participants WHERE study_id = 'A000000'`)
				}
			}
			if len(seen) != 1234 || pages != 13 {
				t.Fatalf("saw %d participants on %d pages, want 1234 on 13", len(seen), pages)
			}
		})
	}
}

func sortKeyOf(r db.ParticipantRow, sort string) string {
	switch sort {
	case "enrolled":
		return r.EnrolledOn.String() + r.StudyID
	case "site":
		return r.SiteCode + " " + r.StudyID
	}
	return r.StudyID
}

func TestParticipantFiltersAndNames(t *testing.T) {
	s := newStore(t)
	seedParticipants(t, s, 50)
	ctx := context.Background()
	page, err := s.Participants(ctx, db.ParticipantFilter{Status: "withdrawn", Limit: 100})
	if err != nil || page.Total != 5 || page.Status[cohort.StatusWithdrawn] != 5 || page.Status[cohort.StatusActive] != 0 {
		t.Fatalf("withdrawn filter: total %d (err %v)", page.Total, err)
	}
	page, _ = s.Participants(ctx, db.ParticipantFilter{SiteID: 1, Limit: 100})
	if page.Total != 25 {
		t.Fatalf("site filter: %d", page.Total)
	}
	// Names are searched and returned only when asked for.
	page, _ = s.Participants(ctx, db.ParticipantFilter{Search: "family7", WithNames: true, Limit: 100})
	if page.Total != 1 || page.Rows[0].Name == "" {
		t.Fatalf("name search with names: %d rows", page.Total)
	}
	page, _ = s.Participants(ctx, db.ParticipantFilter{Search: "family7", Limit: 100})
	if page.Total != 0 {
		t.Fatalf("name search without PHI rights found %d", page.Total)
	}
	page, _ = s.Participants(ctx, db.ParticipantFilter{Search: "S00001", Limit: 100})
	if page.Total != 10 || page.Rows[0].Name != "" {
		t.Fatalf("study ID prefix: %d, name %q", page.Total, page.Rows[0].Name)
	}
	// The search ignores case; a LIKE wildcard typed in the box is taken
	// literally.
	page, _ = s.Participants(ctx, db.ParticipantFilter{Search: "s00001", Limit: 100})
	if page.Total != 10 {
		t.Fatalf("lower-case study ID prefix: %d, want 10", page.Total)
	}
	// Any part of the ID finds it, with or without the separators typed.
	for _, q := range []string{"0017", "00017", "s-000017", "S 000 017"} {
		page, _ = s.Participants(ctx, db.ParticipantFilter{Search: q, Limit: 100})
		if page.Total != 1 || page.Rows[0].StudyID != "S000017" {
			t.Fatalf("search %q: %d rows, want S000017 alone", q, page.Total)
		}
	}
	page, _ = s.Participants(ctx, db.ParticipantFilter{Search: "S0000_", Limit: 100})
	if page.Total != 0 {
		t.Fatalf("an underscore matched as a wildcard: %d rows", page.Total)
	}
}

func TestIdentityIsForPHIRolesAndAudited(t *testing.T) {
	s := newStore(t)
	seedParticipants(t, s, 3)
	ctx := context.Background()
	if _, err := s.Identity(ctx, cohort.Actor{UserID: 0, Name: "m", Role: cohort.Monitor}, 1, "test"); err == nil {
		t.Fatal("monitor read PHI")
	}
	id, err := s.Identity(ctx, cohort.Actor{Name: "c", Role: cohort.Coordinator}, 1, "test")
	if err != nil || id.GivenName != "Given1" {
		t.Fatalf("coordinator: %+v %v", id, err)
	}
	var n int
	s.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events WHERE action = 'participant.view_phi' AND object_id = '1'`).Scan(&n)
	if n != 1 {
		t.Fatalf("PHI views audited: %d, want 1", n)
	}
}

func TestEnrolValidatesAndAudits(t *testing.T) {
	s := newStore(t)
	mustExec(t, s, `INSERT INTO sites (code, name) VALUES ('AA', 'Site A')`)
	ctx := context.Background()
	a := cohort.Actor{Name: "c", Role: cohort.Coordinator}
	// The rules themselves are cohort/enrolment's (tested there); an
	// unreadable date is refused by the form (web). The store applies the
	// rules to every enrolment, whoever makes it.
	birth := cohort.Date{Year: 2030, Month: 1, Day: 1}
	_, err := s.Enrol(ctx, a, db.ParticipantInput{StudyID: "bad id", TimeZone: "Mars/Base", EnrolledOn: cohort.Date{Year: 2027, Month: 1, Day: 1},
		Identity: db.Identity{ZIP: "12", BirthDate: &birth}})
	ve, ok := err.(*cohort.ValidationError)
	if !ok {
		t.Fatalf("err %v, want a validation error", err)
	}
	for _, f := range []string{"study_id", "site_id", "sex", "time_zone", "enrolled_on", "zip"} {
		if ve.Fields[f] == "" {
			t.Errorf("no message for %s", f)
		}
	}
	birth = cohort.Date{Year: 1950, Month: 6, Day: 15}
	p, err := s.Enrol(ctx, a, db.ParticipantInput{StudyID: "RS-1", SiteID: 1, Sex: cohort.Female, TimeZone: "America/Chicago",
		EnrolledOn: cohort.Date{Year: 2026, Month: 3, Day: 2}, Identity: db.Identity{GivenName: "Ilsa", FamilyName: "Marrowby", ZIP: "60614", BirthDate: &birth}})
	if err != nil {
		t.Fatal(err)
	}
	if p.AgeAtEnrolment == nil || *p.AgeAtEnrolment != 75 {
		t.Fatalf("age at enrolment %v, want 75", p.AgeAtEnrolment)
	}
	if _, err := s.Enrol(ctx, a, db.ParticipantInput{StudyID: "RS-1", SiteID: 1, Sex: cohort.Female, TimeZone: "UTC", EnrolledOn: cohort.Date{Year: 2026, Month: 3, Day: 2}}); err == nil {
		t.Fatal("duplicate study ID accepted")
	}
	var newValue string
	s.Pool().QueryRow(ctx, `SELECT new_value::text FROM audit_events WHERE action = 'participant.enrol'`).Scan(&newValue)
	if newValue == "" || strings.Contains(newValue, "Marrowby") {
		t.Fatalf("enrol audit %q: missing, or it copies PHI", newValue)
	}
	// Withdrawal: a stale version is refused, then it works once.
	if _, err := s.Withdraw(ctx, a, p.ID, cohort.Date{Year: 2026, Month: 4, Day: 1}, "moved away", p.Version+1); err == nil {
		t.Fatal("stale withdrawal accepted")
	}
	if _, err := s.Withdraw(ctx, a, p.ID, cohort.Date{Year: 2026, Month: 4, Day: 1}, "moved away", p.Version); err != nil {
		t.Fatal(err)
	}
}

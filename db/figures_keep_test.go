package db_test

import (
	"context"
	"errors"
	"fmt"
	"maps"
	"math/rand/v2"
	"reflect"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"cohortdesk/cmd/cohortdesk/demoload"
	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/credential"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/referral"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"

	"github.com/jackc/pgx/v5"
)

// The kept figures (the cascade, the agreement statistics, data
// sufficiency, enrolment, the start page's counts, triage, the silent
// participants, the lists' totals) are kept as the rows beneath them change.
// compareKept computes each again from the study's own tables, the way the
// pages did before (figures_recount_test.go), and fails on any difference.
func compareKept(t *testing.T, s *db.Store, now func() time.Time, label string) {
	t.Helper()
	ctx := context.Background()
	fail := func(format string, args ...any) { t.Helper(); t.Errorf(label+": "+format, args...) }

	var versions []int
	rows, err := s.Pool().Query(ctx, `SELECT id FROM protocols ORDER BY id`)
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var id int
		rows.Scan(&id)
		versions = append(versions, id)
	}
	sites, err := s.Sites(ctx)
	if err != nil {
		t.Fatal(err)
	}
	var first, last time.Time
	if err := s.Pool().QueryRow(ctx, `SELECT coalesce(min(enrolled_on), current_date), coalesce(max(enrolled_on), current_date) FROM participants`).Scan(&first, &last); err != nil {
		t.Fatal(err)
	}
	mid := first.Add(last.Sub(first) / 2)
	filters := []cascade.Filter{{}, {From: mid}, {To: mid}, {From: first.AddDate(0, 0, 3), To: last.AddDate(0, 0, -3)}, {AsOf: mid.AddDate(0, 2, 0)}}
	for _, v := range versions {
		filters = append(filters, cascade.Filter{ProtocolID: v}, cascade.Filter{ProtocolID: v, From: mid})
	}
	for _, st := range sites {
		filters = append(filters, cascade.Filter{SiteID: st.ID}, cascade.Filter{SiteID: st.ID, To: mid})
	}
	for _, f := range filters {
		c, a, err := s.Figures(ctx, f)
		if err != nil {
			t.Fatal(err)
		}
		rc, ra, err := s.RecountFigures(ctx, f)
		if err != nil {
			t.Fatal(err)
		}
		if c.Protocol != rc.Protocol || len(c.Boxes) != len(rc.Boxes) {
			fail("filter %+v: protocol %v boxes %d, recount %v %d", f, c.Protocol, len(c.Boxes), rc.Protocol, len(rc.Boxes))
			continue
		}
		for i, b := range c.Boxes {
			r := rc.Boxes[i]
			if b.N != len(r.Participants) || b.CaseN != len(r.Cases) || len(b.Exits) != len(r.Exits) {
				fail("filter %+v box %s: %d participants %d cases %d exits, recount %d %d %d", f, b.Key, b.N, b.CaseN, len(b.Exits), len(r.Participants), len(r.Cases), len(r.Exits))
				continue
			}
			if got := boxMembers(t, s, c, i, ""); !slices.Equal(got, r.Participants) {
				fail("filter %+v box %s lists %v, recount %v", f, b.Key, got, r.Participants)
			}
			for j, e := range b.Exits {
				if e.Reason != r.Exits[j].Reason || e.N != len(r.Exits[j].Participants) {
					fail("filter %+v box %s exit %d: %s %d, recount %s %d", f, b.Key, j, e.Reason, e.N, r.Exits[j].Reason, len(r.Exits[j].Participants))
					continue
				}
				if got := boxMembers(t, s, c, i, e.Reason); !slices.Equal(got, r.Exits[j].Participants) {
					fail("filter %+v box %s exit %s lists %v, recount %v", f, b.Key, e.Reason, got, r.Exits[j].Participants)
				}
			}
		}
		// Printed, so intervals and medians that are NaN compare equal.
		if got, want := fmt.Sprintf("%+v", a), fmt.Sprintf("%+v", ra); got != want {
			fail("filter %+v: agreement statistics differ:\n kept    %.600s\n recount %.600s", f, got, want)
		}
	}

	for _, asOf := range []cohort.Date{{}, cohort.DateOf(mid), cohort.DateOf(last).AddDays(20)} {
		got, err := s.Enrolment(ctx, asOf)
		if err != nil {
			t.Fatal(err)
		}
		want, err := s.RecountEnrolment(ctx, asOf)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(got, want) {
			fail("enrolment as of %v:\n kept    %+v\n recount %+v", asOf, got, want)
		}
	}
	suff, err := s.DataSufficiency(ctx)
	if err != nil {
		t.Fatal(err)
	}
	rsuff, err := s.RecountSufficiency(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if len(suff)+len(rsuff) > 0 && !reflect.DeepEqual(suff, rsuff) {
		fail("data sufficiency:\n kept    %+v\n recount %+v", suff, rsuff)
	}
	counts, err := s.Counts(ctx)
	if err != nil {
		t.Fatal(err)
	}
	rcounts, err := s.RecountCounts(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(counts, rcounts) {
		fail("start page counts %+v, recount %+v", counts, rcounts)
	}
	// Triage for nobody in particular and for the people who own most
	// cases (their own cases have a group of their own).
	owners := []int64{0}
	orows, err := s.Pool().Query(ctx, `SELECT owner_id FROM cases WHERE owner_id IS NOT NULL AND closed_at IS NULL GROUP BY 1 ORDER BY count(*) DESC, 1 LIMIT 2`)
	if err != nil {
		t.Fatal(err)
	}
	for orows.Next() {
		var id int64
		orows.Scan(&id)
		owners = append(owners, id)
	}
	for _, me := range owners {
		for _, per := range []int{0, 3} {
			tr, err := s.Triage(ctx, per, me)
			if err != nil {
				t.Fatal(err)
			}
			rtr, err := s.RecountTriage(ctx, per, me)
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(tr.Counts, rtr.Counts) || tr.UnreadRecordings != rtr.UnreadRecordings || len(tr.Rows) != len(rtr.Rows) {
				fail("triage for %d (%d a group): counts %v unread %d rows %d, recount %v %d %d", me, per, tr.Counts, tr.UnreadRecordings, len(tr.Rows), rtr.Counts, rtr.UnreadRecordings, len(rtr.Rows))
				continue
			}
			for i := range tr.Rows {
				if tr.Rows[i].ID != rtr.Rows[i].ID || tr.Rows[i].Bucket != rtr.Rows[i].Bucket {
					fail("triage for %d (%d a group) row %d: case %d in %v, recount case %d in %v", me, per, i, tr.Rows[i].ID, tr.Rows[i].Bucket, rtr.Rows[i].ID, rtr.Rows[i].Bucket)
				}
			}
		}
	}
	for _, days := range []int{3, 14} {
		want, err := s.RecountSilent(ctx, days)
		if err != nil {
			t.Fatal(err)
		}
		var got []db.SilentParticipant
		after, total := "", 0
		for {
			page, err := s.SilentParticipants(ctx, days, after, 7)
			if err != nil {
				t.Fatal(err)
			}
			got, total = append(got, page.Rows...), page.Total
			if page.Next == "" {
				break
			}
			after = page.Next
		}
		if len(got) != len(want) || total != min(len(want), db.SilentCountCap) {
			fail("silent for %d days: %d listed (count %d), recount %d", days, len(got), total, len(want))
			continue
		}
		for i := range got {
			if got[i].ID != want[i].ID || got[i].Days != want[i].Days || !reflect.DeepEqual(got[i].LastData, want[i].LastData) {
				fail("silent for %d days, row %d: %+v, recount %+v", days, i, got[i], want[i])
			}
		}
	}
	count := func(sql string) int64 {
		var n int64
		if err := s.Pool().QueryRow(ctx, sql).Scan(&n); err != nil {
			t.Fatal(err)
		}
		return n
	}
	for _, pf := range []db.ParticipantFilter{{}, {Status: cohort.StatusActive}, {Status: cohort.StatusCompleted}, {Status: cohort.StatusWithdrawn},
		{SiteID: sites[0].ID}, {SiteID: sites[0].ID, Status: cohort.StatusActive}} {
		page, err := s.Participants(ctx, pf)
		if err != nil {
			t.Fatal(err)
		}
		status, total, err := s.RecountParticipants(ctx, pf)
		if err != nil {
			t.Fatal(err)
		}
		if page.Total != total || !maps.Equal(page.Status, status) {
			fail("participants %+v: total %d by status %v, recount %d %v", pf, page.Total, page.Status, total, status)
		}
	}
	for _, cf := range []db.CaseFilter{{}, {Scope: db.EndedCases}, {Scope: db.AllCases}, {State: followup.Open}, {Unowned: true}, {Overdue: true}} {
		page, err := s.Cases(ctx, cf)
		if err != nil {
			t.Fatal(err)
		}
		conds := []string{"true"}
		switch {
		case cf.State != "":
			conds = append(conds, fmt.Sprintf("state = '%s'", cf.State))
		case cf.Scope == db.WorkingCases:
			conds = append(conds, "closed_at IS NULL")
		case cf.Scope == db.EndedCases:
			conds = append(conds, "closed_at IS NOT NULL")
		}
		if cf.Unowned {
			conds = append(conds, "owner_id IS NULL")
		}
		if cf.Overdue {
			conds = append(conds, fmt.Sprintf("due_at <= '%s'", now().UTC().Format(time.RFC3339Nano)))
		}
		if want := count("SELECT count(*) FROM cases WHERE " + strings.Join(conds, " AND ")); page.Total != want {
			fail("cases %+v: total %d, counted %d", cf, page.Total, want)
		}
	}
}

// TestKeptFiguresOnTheDemo: the fictional demo study, loaded through the
// app's own paths (and some bare SQL the background pass picks up).
func TestKeptFiguresOnTheDemo(t *testing.T) {
	s := db.New(dbtest.Pool(t), nil)
	if _, err := demoload.Load(context.Background(), s, demoload.Options{Seed: 11, Participants: 120, PasswordCost: credential.TestParams, Password: "kept figures test"}); err != nil {
		t.Fatal(err)
	}
	compareKept(t, s, time.Now, "demo")
	if err := s.CompactLedgers(context.Background()); err != nil {
		t.Fatal(err)
	}
	compareKept(t, s, time.Now, "demo, ledgers folded")
}

// randomStudy is a study built at random: participants over two sites with
// random enrolment days, sexes, ages and withdrawals, two protocol versions
// with random verdicts, cases under both, and each case taken a random way
// through follow-up (contact, closing, recorder, recordings short and long,
// readings that agree, disagree and are adjudicated, referral).
type randomStudy struct {
	*caseFixture
	rng   *rand.Rand
	inv2  cohort.Actor
	cases []int64
	v2    int
	mu    sync.Mutex
	paths map[string]int // how often each of main's write paths succeeded
}

func newRandomStudy(t *testing.T, seed uint64, n int) *randomStudy {
	t.Helper()
	ctx := context.Background()
	f := newCaseFixture(t, n)
	r := &randomStudy{caseFixture: f, rng: rand.New(rand.NewPCG(seed, 7)), paths: map[string]int{}}
	u, err := f.s.CreateUser(ctx, cohort.System, db.NewUser{Email: "second@example.org", Name: "Second reader", Role: cohort.Investigator, PasswordHash: "x"})
	if err != nil {
		t.Fatal(err)
	}
	r.inv2 = u.Actor("127.0.0.1", "test")
	mustExec(t, f.s, `UPDATE participants SET enrolled_on = date '2025-10-01' + (id * 7919 % 120)::int,
		sex = (ARRAY['F','M','U'])[1 + id % 3], age_at_enrolment = CASE WHEN id % 5 = 0 THEN NULL ELSE 40 + (id * 13) % 50 END,
		site_id = 1 + (id * 31 % 7) % 2`)
	mustExec(t, f.s, `UPDATE participants SET withdrawn_on = enrolled_on + (id % 60)::int, withdrawal_reason = 'moved away' WHERE id % 9 = 0`)
	// What messages to participants need: contact details on file, the
	// study's contact route and the default templates.
	mustExec(t, f.s, `INSERT INTO participant_identity (participant_id, given_name, family_name, email, street, city, zip)
		SELECT id, 'Wren' || id, 'Alderby', lower(study_id) || '@example.org', id || ' Mill Lane', 'Riverside', '55501' FROM participants`)
	mustExec(t, f.s, `INSERT INTO study (id, name, time_zone, contact_route) VALUES (1, 'Random study', 'UTC', 'call 555-0100 on working days')
		ON CONFLICT (id) DO UPDATE SET contact_route = excluded.contact_route`)
	if err := f.s.EnsureDefaultTemplates(ctx); err != nil {
		t.Fatal(err)
	}
	if err := f.s.Pool().QueryRow(ctx, `INSERT INTO protocols (name, version, params) VALUES ('standard', 2, '{}') RETURNING id`).Scan(&r.v2); err != nil {
		t.Fatal(err)
	}
	// Verdicts for each participant's first weeks under both versions.
	var pids []int64
	var protos, weeks []int32
	var verdicts []string
	// In id order: f.pids is a map, and the walk must be the same on every
	// run for its seed.
	for _, pid := range slices.Sorted(maps.Values(f.pids)) {
		for _, v := range []int{f.proto, r.v2} {
			for w := range r.rng.IntN(8) {
				verdict := []string{"negative", "negative", "negative", "insufficient", "positive"}[r.rng.IntN(5)]
				pids, protos, weeks, verdicts = append(pids, pid), append(protos, int32(v)), append(weeks, int32(w)), append(verdicts, verdict)
			}
		}
	}
	mustExec(t, f.s, `INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
		SELECT p, v, w, x, x, '{}', 'd', 80 FROM unnest($1::bigint[], $2::int[], $3::int[], $4::text[]) AS u(p, v, w, x)`, pids, protos, weeks, verdicts)
	// Cases under the second version (active for a while), then the first.
	mustExec(t, f.s, `UPDATE protocols SET active = false`)
	mustExec(t, f.s, `UPDATE protocols SET active = true WHERE id = $1`, r.v2)
	f.sync()
	mustExec(t, f.s, `UPDATE protocols SET active = false`)
	mustExec(t, f.s, `UPDATE protocols SET active = true WHERE id = $1`, f.proto)
	f.sync()
	rows, err := f.s.Pool().Query(ctx, `SELECT id FROM cases ORDER BY id`)
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var id int64
		rows.Scan(&id)
		r.cases = append(r.cases, id)
	}
	if len(r.cases) < 10 {
		t.Fatalf("only %d cases", len(r.cases))
	}
	return r
}

// expected reports errors a random step may meet and that say only that the
// step did not fit the case's state or someone changed it first.
func expected(err error) bool {
	var ve *cohort.ValidationError
	var ce *cohort.ConflictError
	return err == nil || errors.As(err, &ve) || errors.As(err, &ce) || errors.Is(err, cohort.ErrConflict)
}

// step takes case id one random step further along follow-up, by every
// path that changes what the kept figures count: contact attempts and
// messages queued with their attempt, closing, the recorder, recordings
// short and long, readings that agree, disagree and are adjudicated,
// readings amended and withdrawn by their reader, recordings marked as
// needing no over-read, and referral summaries issued and signed off.
func (r *randomStudy) step(ctx context.Context, rng *rand.Rand, id int64) error {
	c, err := r.s.Case(ctx, id)
	if err != nil {
		return err
	}
	if c.State.Terminal() {
		return nil
	}
	now := r.clock.now()
	switch c.State {
	case followup.Open, followup.Contacting:
		switch rng.IntN(6) {
		case 0:
			_, err = r.s.LogAttempt(ctx, r.coord, id, db.AttemptInput{Version: c.Version, Channel: "phone", Outcome: "no_answer"})
		case 1:
			purpose := []outreach.Purpose{outreach.PurposeFirstContact, outreach.PurposeReminder}[rng.IntN(2)]
			channel := []followup.Channel{followup.ChannelEmail, followup.ChannelLetter}[rng.IntN(2)]
			if _, err = r.s.QueueMessage(ctx, r.coord, id, db.MessageInput{Version: c.Version, Purpose: purpose, Channel: channel}); err == nil {
				r.did("message")
			}
		case 2:
			_, err = r.s.CloseCase(ctx, r.coord, id, db.MoveInput{Version: c.Version, To: followup.ClosedUnreachable, Reason: "no answer"})
		default:
			_, err = r.s.LogAttempt(ctx, r.coord, id, db.AttemptInput{Version: c.Version, Channel: "phone", Outcome: "reached"})
		}
	case followup.Reached:
		if rng.IntN(4) == 0 {
			_, err = r.s.CloseCase(ctx, r.coord, id, db.MoveInput{Version: c.Version, To: followup.ClosedDeclined, Reason: "declined the recorder"})
		} else {
			_, err = r.s.RecordShipment(ctx, r.coord, id, c.Version, cohort.DateOf(now), "TRK")
		}
	case followup.RecorderSent, followup.RecordingReceived, followup.OverRead:
		recs, err := r.s.CaseRecordings(ctx, id)
		if err != nil {
			return err
		}
		var unread, read *db.Recording
		confirmed := false // a recording's over-read confirms AF: a referral can be signed off
		for i := range recs {
			if recs[i].Conclusion.ConfirmsAF(recs[i].TooShort) {
				confirmed = true
			}
			if len(recs[i].Readings) < 3 && recs[i].NotNeeded == "" && rng.IntN(2) == 0 {
				unread = &recs[i]
			}
			if len(recs[i].Readings) > 0 {
				read = &recs[i]
			}
		}
		switch {
		case confirmed && c.State == followup.OverRead && rng.IntN(2) == 0:
			// A summary issued, then signed off by the investigator: the
			// case is referred.
			var ref db.Referral
			if ref, err = r.issue(ctx, c); err == nil {
				if _, err = r.s.SignOffReferral(ctx, r.inv, ref.ID, fakeDraw); err == nil {
					r.did("signed off")
				}
			}
		case read != nil && rng.IntN(6) == 0:
			// The reader of one reading corrects it.
			o := read.Readings[rng.IntN(len(read.Readings))]
			by := r.inv
			if o.ReaderID == r.inv2.UserID {
				by = r.inv2
			}
			in := db.RevisionInput{Role: o.Role, Change: overread.Withdrawn, Reason: "entered on the wrong recording"}
			if rng.IntN(2) == 0 {
				in.Change, in.Rhythm, in.Confidence, in.Reason = overread.Amended, []overread.Rhythm{overread.AF, overread.Sinus}[rng.IntN(2)], "probable", "looked again"
			}
			if _, err = r.s.ReviseOverRead(ctx, by, read.ID, in); err == nil {
				r.did(string(in.Change))
			}
		case unread != nil && len(unread.Readings) == 0 && rng.IntN(8) == 0:
			if err = r.s.MarkReadNotNeeded(ctx, r.inv, unread.ID, "a repeat recording replaced it"); err == nil {
				r.did("not needed")
			}
		case unread != nil:
			reader, role := r.inv, overread.Role("")
			if len(unread.Readings) == 1 {
				reader = r.inv2
			}
			if len(unread.Readings) == 2 && unread.Readings[0].Rhythm == unread.Readings[1].Rhythm {
				return nil
			}
			rhythm := []overread.Rhythm{overread.AF, overread.AF, overread.Sinus, overread.Flutter, overread.Other, overread.Uninterpretable}[rng.IntN(6)]
			_, err = r.s.AddOverRead(ctx, reader, unread.ID, db.OverReadInput{Role: role, Rhythm: rhythm, Confidence: "certain", ReaderID: reader.UserID, ReadOn: cohort.DateOf(now)})
		case len(recs) < 2:
			dur := []float64{45, 45, 20}[rng.IntN(3)]
			autos := overread.Autos()
			_, err = r.s.AddRecording(ctx, r.coord, id, ecg.RecordingInput{TakenAt: now.Add(-time.Hour), DurationS: dur, Auto: autos[rng.IntN(len(autos))]})
		default:
			_, err = r.s.CloseCase(ctx, r.coord, id, db.MoveInput{Version: c.Version, To: followup.ClosedNotConfirmed, Reason: "not confirmed"})
		}
		return err
	}
	return err
}

// issue issues case c's referral summary as a coordinator would.
func (r *randomStudy) issue(ctx context.Context, c db.Case) (db.Referral, error) {
	b, err := r.s.ReferralSource(ctx, c.ParticipantID, c.ID)
	if err != nil {
		return db.Referral{}, err
	}
	b.Source.IssuedAt, b.Source.Cautions = r.clock.now(), []string{"Screening is not diagnosis."}
	sum, err := referral.Build(b.Source, referralSecret)
	if err != nil {
		return db.Referral{}, err
	}
	return r.s.IssueReferral(ctx, r.coord, db.ReferralIssue{Basis: b, Summary: sum, Format: "pdf", Paper: "a4", PDFSHA256: strings.Repeat("ab", 32)})
}

// did counts a path the walk took, so a test can show it took each.
func (r *randomStudy) did(path string) {
	r.mu.Lock()
	r.paths[path]++
	r.mu.Unlock()
}

// walk takes every case several random steps, a day apart.
func (r *randomStudy) walk(t *testing.T, rounds int) {
	t.Helper()
	ctx := context.Background()
	for round := range rounds {
		r.clock.set(fixedNow.AddDate(0, 0, round+1))
		for _, id := range r.cases {
			if err := r.step(ctx, r.rng, id); !expected(err) {
				t.Fatalf("case %d: %v", id, err)
			}
		}
	}
}

// TestKeptFiguresOnARandomStudy: a study built at random, its cases walked
// at random through follow-up; then the study's time zone moves (every flag
// day with it) and a participant's site and enrolment change.
func TestKeptFiguresOnARandomStudy(t *testing.T) {
	r := newRandomStudy(t, 3, 90)
	r.walk(t, 8)
	compareKept(t, r.s, r.clock.now, "random study")
	// The walk took every write path that came with outreach, corrections
	// and sign-off, so the comparison covered them.
	for _, p := range []string{"message", string(overread.Amended), string(overread.Withdrawn), "not needed", "signed off"} {
		if r.paths[p] == 0 {
			t.Errorf("the walk never took the %q path (took %v)", p, r.paths)
		}
	}
	saveSettings(t, r.s, func(st *db.StudySettings) { st.TimeZone = "Pacific/Auckland" })
	mustExec(t, r.s, `UPDATE participants SET site_id = 3 - site_id, enrolled_on = enrolled_on - 3 WHERE id IN (SELECT participant_id FROM cases ORDER BY id LIMIT 5)`)
	compareKept(t, r.s, r.clock.now, "random study, moved")
}

// TestKeptFiguresAfterConcurrentChanges: several goroutines change the same
// random study at once (case steps through the store, withdrawals, verdicts
// flipped by bare SQL with background passes running beside them, ledgers
// folded meanwhile); afterwards every kept figure equals its recount.
func TestKeptFiguresAfterConcurrentChanges(t *testing.T) {
	r := newRandomStudy(t, 5, 80)
	r.walk(t, 2)
	ctx := context.Background()
	var wg sync.WaitGroup
	errs := make(chan error, 100)
	for g := range 6 {
		rng := rand.New(rand.NewPCG(uint64(g), 99))
		wg.Go(func() {
			for range 25 {
				var err error
				switch g % 3 {
				case 0, 1:
					err = r.step(ctx, rng, r.cases[rng.IntN(len(r.cases))])
				default:
					switch rng.IntN(4) {
					case 0:
						var pid int64
						var version int
						for _, id := range r.pids {
							pid = id
							break
						}
						if err = r.s.Pool().QueryRow(ctx, `SELECT id, version FROM participants WHERE withdrawn_on IS NULL ORDER BY random() LIMIT 1`).Scan(&pid, &version); err == nil {
							_, err = r.s.Withdraw(ctx, r.coord, pid, cohort.DateOf(r.clock.now()), "moved away", version)
						}
					case 1:
						_, err = r.s.Pool().Exec(ctx, `UPDATE screen_results SET verdict = CASE verdict WHEN 'positive' THEN 'negative' ELSE 'positive' END
							WHERE (participant_id, protocol_id, week) IN (SELECT participant_id, protocol_id, week FROM screen_results ORDER BY random() LIMIT 3)`)
					case 2:
						_, err = r.s.DrainFigures(ctx, 7)
					default:
						err = r.s.CompactLedgers(ctx)
					}
				}
				if !expected(err) {
					errs <- err
					return
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
	drainFigures(t, r.s)
	compareKept(t, r.s, r.clock.now, "after concurrent changes")
}

// A change that marks more participants than one transaction computes the
// figures of (2,000) leaves them to the background pass instead of holding
// its transaction: the pages say how many wait, and after the pass every
// kept figure equals a recount. Here one case sync opens a case for each of
// 2,160 participants (every tenth of 2,400 has withdrawn and gets none).
func TestAChangeOfVeryManyParticipantsWaitsForTheBackgroundPass(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	p := mustDefault(t, s)
	saveSettings(t, s, nil)
	seedParticipants(t, s, 2400)
	mustExec(t, s, `INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
		SELECT id, $1, 1, 'positive', 'positive by test', '{}', 'x', 100 FROM participants`, p.ID)
	drainFigures(t, s)
	if pend, err := s.Pending(ctx); err != nil || pend.Participants != 0 {
		t.Fatalf("%d participants wait before the change (err %v)", pend.Participants, err)
	}
	rows, err := s.Pool().Query(ctx, `SELECT id FROM participants ORDER BY id`)
	if err != nil {
		t.Fatal(err)
	}
	ids, err := pgx.CollectRows(rows, pgx.RowTo[int64])
	if err != nil {
		t.Fatal(err)
	}
	opened, _, err := s.SyncCases(ctx, cohort.System, p.ID, ids)
	if err != nil {
		t.Fatal(err)
	}
	if opened != 2160 {
		t.Fatalf("%d cases opened, want 2160", opened)
	}
	pend, err := s.Pending(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if pend.Participants != 2160 {
		t.Errorf("%d participants' figures wait after the change, want the 2160 it touched", pend.Participants)
	}
	drainFigures(t, s)
	if pend, _ := s.Pending(ctx); pend.Participants != 0 {
		t.Errorf("%d participants still wait after the background pass", pend.Participants)
	}
	compareKept(t, s, func() time.Time { return fixedNow }, "after the background pass")
}

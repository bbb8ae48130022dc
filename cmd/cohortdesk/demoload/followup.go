package demoload

import (
	"context"
	"fmt"
	"sort"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/demo"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
)

// clock is the demo loader's settable clock: follow-up events are entered with
// the store's "now" set to when they happened in the fictional study, so the
// case fields carry those times. (The audit trail keeps its own database
// clock: it records when the loader entered each event.)
type clock struct{ t time.Time }

func (c *clock) now() time.Time { return c.t }

// caseEvent is one scripted step of a case, in time order.
type caseEvent struct {
	at      time.Time
	attempt *demo.Attempt
	move    *demo.Transition
	arrive  *demo.Recording // a recording reaches the study
	read    *demo.Recording // a clinician reads it
}

// flagTime is when the study would have flagged a participant's week: the
// morning after the week ended (capped at the study's today).
func flagTime(st *demo.Study, p demo.Participant, week int) time.Time {
	_, end := cohort.WeekBounds(p.Enrolled, p.Loc, week)
	opened := end.Add(9 * time.Hour)
	if latest := st.Today.Add(-time.Hour); opened.After(latest) {
		opened = latest
	}
	return opened
}

// followUps opens the cases as if the study had been running all along -
// each positive week's result arriving, and the cases synced, the morning
// after the week ended - asks the generator for each case's scripted
// history, and enters it through the case store as the scripted staff
// member, with the store's clock (and the audit trail's) set to when each
// step happened.
func followUps(ctx context.Context, store *db.Store, st *demo.Study, users map[string]db.User, secret []byte) (int, error) {
	clk := &clock{}
	cs := db.New(store.Pool(), clk.now)
	ctx = db.WithHistoryClock(ctx, clk.now)
	pv, err := store.ActiveProtocol(ctx)
	if err != nil {
		return 0, err
	}
	// Every week was screened at once when the demo loaded. The positive
	// results are held back and given back one at a time, in the order the
	// weeks ended, so a case opens (and its opening is audited, with its
	// first deadline) when its own week was flagged, not with an earlier
	// episode of the same participant.
	// The held results wait in a temporary table of one connection: the
	// loader runs as the application's database role, which may not create
	// tables.
	pool, err := store.Pool().Acquire(ctx)
	if err != nil {
		return 0, err
	}
	defer pool.Release()
	if _, err := pool.Exec(ctx, `DROP TABLE IF EXISTS seed_held_results`); err != nil {
		return 0, err
	}
	for _, q := range []string{
		`CREATE TEMP TABLE seed_held_results AS SELECT * FROM screen_results WHERE protocol_id = $1 AND verdict = 'positive'`,
		`DELETE FROM screen_results WHERE protocol_id = $1 AND verdict = 'positive'`,
	} {
		if _, err := pool.Exec(ctx, q, pv.ID); err != nil {
			return 0, fmt.Errorf("seed: hold back positive results: %w", err)
		}
	}
	rows, err := pool.Query(ctx, `SELECT p.id, p.study_id, h.week FROM seed_held_results h JOIN participants p ON p.id = h.participant_id`)
	if err != nil {
		return 0, err
	}
	type flag struct {
		id   int64
		week int16
		when time.Time
	}
	var flags []flag
	for rows.Next() {
		var f flag
		var sid string
		if err := rows.Scan(&f.id, &sid, &f.week); err != nil {
			rows.Close()
			return 0, err
		}
		p, ok := st.Participant(sid)
		if !ok {
			continue
		}
		f.when = flagTime(st, p, int(f.week))
		flags = append(flags, f)
	}
	if err := rows.Err(); err != nil {
		return 0, err
	}
	sort.SliceStable(flags, func(i, j int) bool { return flags[i].when.Before(flags[j].when) })
	for _, f := range flags {
		clk.t = f.when
		if _, err := pool.Exec(ctx, `INSERT INTO screen_results SELECT * FROM seed_held_results WHERE participant_id = $1 AND week = $2`, f.id, f.week); err != nil {
			return 0, err
		}
		if _, _, err := cs.SyncCases(ctx, cohort.System, pv.ID, []int64{f.id}); err != nil {
			return 0, err
		}
	}
	// Positive weeks of participants outside the generated study, if any,
	// come back unchanged.
	if _, err := pool.Exec(ctx, `INSERT INTO screen_results SELECT h.* FROM seed_held_results h
		WHERE NOT EXISTS (SELECT 1 FROM screen_results sr WHERE sr.participant_id = h.participant_id AND sr.protocol_id = h.protocol_id AND sr.week = h.week)`); err != nil {
		return 0, err
	}
	if _, err := pool.Exec(ctx, `DROP TABLE seed_held_results`); err != nil {
		return 0, err
	}
	page, err := store.Cases(ctx, db.CaseFilter{Limit: 10000})
	if err != nil {
		return 0, err
	}
	var inputs []demo.CaseInput
	var ids []int64
	for _, c := range page.Rows {
		p, ok := st.Participant(c.StudyID)
		if !ok {
			continue
		}
		// Opened at its own flag time, when its first week's result came in.
		opened := flagTime(st, p, c.FirstWeek)
		inputs = append(inputs, demo.CaseInput{StudyID: c.StudyID, Week: c.FirstWeek, Opened: opened})
		ids = append(ids, c.ID)
	}
	clk.t = st.Today
	if _, err := cs.RescheduleOpenCases(ctx); err != nil {
		return 0, err
	}
	plans := st.PlanFollowUps(inputs)
	for i, f := range plans {
		p, _ := st.Participant(f.Case.StudyID)
		if err := playCase(ctx, cs, clk, ids[i], f, users, p.Loc, secret); err != nil {
			return i, fmt.Errorf("seed: case %d (%s): %w", ids[i], f.Case.StudyID, err)
		}
	}
	return len(plans), nil
}

func playCase(ctx context.Context, cs *db.Store, clk *clock, id int64, f demo.FollowUp, users map[string]db.User, loc *time.Location, secret []byte) error {
	var evs []caseEvent
	for i := range f.Attempts {
		evs = append(evs, caseEvent{at: f.Attempts[i].At, attempt: &f.Attempts[i]})
	}
	for i := range f.Transitions {
		evs = append(evs, caseEvent{at: f.Transitions[i].At, move: &f.Transitions[i]})
	}
	for i := range f.Recordings {
		r := &f.Recordings[i]
		evs = append(evs, caseEvent{at: r.Received, arrive: r})
		if !r.ReadAt.IsZero() && r.OverRead != "" {
			evs = append(evs, caseEvent{at: r.ReadAt, read: r})
		}
	}
	recID := map[*demo.Recording]int64{}
	var signer db.User
	for _, u := range users {
		if u.Role == cohort.Investigator {
			signer = u
		}
	}
	sort.SliceStable(evs, func(i, j int) bool { return evs[i].at.Before(evs[j].at) })
	actor := func(login string) cohort.Actor {
		if u, ok := users[login]; ok {
			return u.Actor("", "demo")
		}
		return cohort.Actor{Name: LoaderName}
	}
	if owner, ok := users[f.Owner]; ok && len(evs) > 0 {
		clk.t = evs[0].at.Add(-time.Minute)
		c, err := cs.Case(ctx, id)
		if err != nil {
			return err
		}
		if _, err := cs.AssignCase(ctx, actor(f.Owner), id, c.Version, owner.ID); err != nil {
			return err
		}
	}
	for _, ev := range evs {
		clk.t = ev.at
		c, err := cs.Case(ctx, id)
		if err != nil {
			return err
		}
		switch {
		case ev.attempt != nil:
			a := ev.attempt
			_, err = cs.LogAttempt(ctx, actor(a.By), id, db.AttemptInput{Version: c.Version, Channel: a.Channel,
				Outcome: a.Outcome, Note: a.Note})
		case ev.arrive != nil:
			recID[ev.arrive], err = addRecording(ctx, cs, actor(f.Owner), id, *ev.arrive, uint64(id)*31+uint64(len(recID)))
		case ev.read != nil:
			reader, ok := users[ev.read.Reader]
			if !ok {
				reader = signer
			}
			err = addOverRead(ctx, cs, reader, recID[ev.read], *ev.read, loc)
		case ev.move != nil && ev.move.To == followup.Referred:
			// A case is referred only by signing its summary off; without a
			// deployment secret no summary can be issued, and the case stays
			// over-read, waiting for its summary.
			if len(secret) > 0 {
				err = refer(ctx, cs, actor(ev.move.By), signer, c, secret, ev.at)
			}
		case ev.move != nil:
			err = playMove(ctx, cs, actor(ev.move.By), c, ev.move.To, ev.at)
		}
		if err != nil {
			return err
		}
	}
	return nil
}

// playMove enters one scripted state change through the action a person would
// use for it. Moves that attempts make by themselves (first attempt, reached,
// declined) are already done when their turn comes.
func playMove(ctx context.Context, cs *db.Store, a cohort.Actor, c db.Case, to followup.State, at time.Time) error {
	if c.State == to {
		return nil
	}
	day := cohort.DateOf(at)
	var err error
	switch to {
	case followup.RecorderSent:
		_, err = cs.RecordShipment(ctx, a, c.ID, c.Version, day, demo.TrackingNumber(c.ID))
	case followup.RecordingReceived, followup.OverRead:
		// The recording's arrival and its over-read move the case themselves.
		return nil
	default:
		if to.Terminal() {
			_, err = cs.CloseCase(ctx, a, c.ID, db.MoveInput{Version: c.Version, To: to, Reason: closingReason(to)})
		} else {
			_, err = cs.MoveCase(ctx, a, c.ID, db.MoveInput{Version: c.Version, To: to})
		}
	}
	return err
}

func closingReason(s followup.State) string {
	switch s {
	case followup.ClosedNotConfirmed:
		return "over-read did not show atrial fibrillation"
	case followup.ClosedUnreachable:
		return "no answer after the attempts the study allows"
	case followup.ClosedDeclined:
		return "participant declined the recording"
	case followup.ClosedWithdrawn:
		return "participant withdrew from the study"
	}
	return "closed"
}

package db_test

import (
	"context"
	"encoding/json"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// TestStoredResultKeepsItsRevision: a protocol version stored before
// algorithm revisions existed (its JSON has no "revision") screens a week
// of sparse readings: 30-minute windows holding readings at minutes 0, 7
// and 14 only, 56 of them. Under revision 0 the whole windows are 28 h of
// wear, enough for the 24 h minimum; the stored result says so, and
// recomputing it from the stored version and the stored readings gives it
// back byte for byte. A new version with the current revision, from the
// same parameters, counts the 13.1 h the readings cover and calls the week
// insufficient: the change reached the results only through the new version.
func TestStoredResultKeepsItsRevision(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	mustDefault(t, s)
	pid := dbtest.AddParticipant(t, s.Pool(), "P-SPARSE", enrolDay)
	start := dbtest.WeekStart(enrolDay, 1)
	var hr cohort.Samples
	for wi := range 56 {
		ws := start.Add(time.Duration(wi) * 30 * time.Minute)
		for _, m := range []int{0, 7, 14} {
			hr.Append(ws.Add(time.Duration(m)*time.Minute).UnixMilli(), int32(64+m%2))
		}
	}
	dbtest.PutWearWeek(t, s.Pool(), pid, 1, cohort.HeartRate, hr)

	// The version as stored before revisions: the JSON of today's
	// parameters without the revision field.
	p := screen.DefaultProtocol()
	p.Revision = 0
	raw, _ := json.Marshal(p)
	var m map[string]any
	json.Unmarshal(raw, &m)
	delete(m, "revision")
	old, _ := json.Marshal(m)
	var oldID int
	if err := s.Pool().QueryRow(ctx, `INSERT INTO protocols (name, version, params, note, created_by)
		VALUES ('before revisions', 1, $1, 'stored before revisions', 'test') RETURNING id`, old).Scan(&oldID); err != nil {
		t.Fatal(err)
	}
	sc := db.NewScreener(s, nil)
	if _, err := sc.ScreenNow(ctx, []int64{pid}, oldID, nil); err != nil {
		t.Fatal(err)
	}
	stored := storedResults(t, s, oldID)
	if len(stored) != 1 || stored[0].verdict != "negative" {
		t.Fatalf("stored under revision 0: %+v, want one negative week", stored)
	}
	v, err := s.Protocol(ctx, oldID)
	if err != nil {
		t.Fatal(err)
	}
	if v.Params.Revision != 0 {
		t.Fatalf("a version stored without a revision reads as %d", v.Params.Revision)
	}
	res, again := screenStored(t, s, pid, 1, v.Params)
	if string(again) != stored[0].result {
		t.Fatalf("recomputed result differs from the stored one:\nstored %.400s\nagain  %.400s", stored[0].result, again)
	}
	if res.WearHours != 28 {
		t.Errorf("revision 0 wear %v h, want 28 (whole windows)", res.WearHours)
	}

	// The current revision reaches results through a new version only.
	cur := newVersion(t, s, oldID, func(q *screen.Protocol) { q.Revision = screen.CurrentRevision })
	if _, err := sc.ScreenNow(ctx, []int64{pid}, cur.ID, nil); err != nil {
		t.Fatal(err)
	}
	now := storedResults(t, s, cur.ID)
	if len(now) != 1 || now[0].verdict != "insufficient" {
		t.Fatalf("stored under revision %d: %+v, want insufficient", screen.CurrentRevision, now)
	}
	if still := storedResults(t, s, oldID); still[0].result != stored[0].result {
		t.Error("the old version's stored result changed")
	}
}

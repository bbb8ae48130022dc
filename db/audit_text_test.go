package db_test

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
)

// TestAuditKeepsNoFreeText writes every kind of staff free text through the
// store (a participant note, a case's working note, a contact attempt's
// note, the reason of a move between working states, a closing reason, a
// withdrawal reason, then an edit of the withdrawn participant) and finds
// none of it in any audit event: each event keeps where the text lives and
// its SHA-256 (a textRef), and the text is where the reference says. A
// stale save of the note is still refused as changed by someone else, and
// the case timeline still shows that the note changed.
func TestAuditKeepsNoFreeText(t *testing.T) {
	f := newCaseFixture(t, 1)
	f.positive(f.proto, "P1", 3)
	f.sync()
	ctx := context.Background()
	id, pid := f.caseID("P1"), f.pids["P1"]
	texts := map[string]string{
		"note":    "FREE-TEXT-NOTE call Wenlo Fixtable on (104) 555-0104",
		"attempt": "FREE-TEXT-ATTEMPT left a message at 4 Fixtable Spur",
		"move":    "FREE-TEXT-MOVE reached by her daughter",
		"close":   "FREE-TEXT-CLOSE declined, born 1951-04-07",
		"pnote":   "FREE-TEXT-PNOTE lives at ZIP 47913",
		"reason":  "FREE-TEXT-REASON moving to her son's in Canaryhold",
	}
	must := func(c db.Case, err error) db.Case {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
		return c
	}
	c := must(f.s.SetCaseNote(ctx, f.coord, id, 1, texts["note"]))
	c = must(f.s.LogAttempt(ctx, f.coord, id, db.AttemptInput{Version: c.Version, Channel: followup.ChannelPhone, Outcome: followup.OutcomeNoAnswer, Note: texts["attempt"]}))
	c = must(f.s.MoveCase(ctx, f.coord, id, db.MoveInput{Version: c.Version, To: followup.Reached, Reason: texts["move"]}))
	stale := c.Version
	texts["note2"] = texts["note"] + " (again)"
	c = must(f.s.SetCaseNote(ctx, f.inv, id, c.Version, texts["note2"]))
	if _, err := f.s.SetCaseNote(ctx, f.coord, id, stale, "a note on a stale copy"); err == nil || !strings.Contains(err.Error(), "note is now") {
		t.Errorf("a stale note save: %v, want the conflict naming the note", err)
	}
	c = must(f.s.CloseCase(ctx, f.coord, id, db.MoveInput{Version: c.Version, To: followup.ClosedDeclined, Reason: texts["close"]}))
	if err := f.s.AddNote(ctx, f.coord, pid, texts["pnote"]); err != nil {
		t.Fatal(err)
	}
	p, err := f.s.Participant(ctx, pid)
	if err != nil {
		t.Fatal(err)
	}
	if p, err = f.s.Withdraw(ctx, f.coord, pid, cohort.Date{Year: 2026, Month: 2, Day: 2}, texts["reason"], p.Version); err != nil {
		t.Fatal(err)
	}
	if _, err := f.s.UpdateParticipant(ctx, f.coord, pid, db.ParticipantInput{StudyID: "P1", SiteID: p.SiteID, Sex: cohort.Female,
		TimeZone: "UTC", EnrolledOn: p.EnrolledOn, Version: p.Version}); err != nil {
		t.Fatal(err)
	}

	var events int
	f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events`).Scan(&events)
	var copies []string
	rows, err := f.s.Pool().Query(ctx, `SELECT action, coalesce(old_value::text, '') || coalesce(new_value::text, '') FROM audit_events WHERE (coalesce(old_value::text, '') || coalesce(new_value::text, '')) LIKE '%FREE-TEXT-%'`)
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var action, v string
		rows.Scan(&action, &v)
		copies = append(copies, action)
	}
	rows.Close()
	if len(copies) > 0 || events < 8 {
		t.Fatalf("%d audit events; free text copied into %v", events, copies)
	}

	// Each text is referred to by its home and digest, and is there (the
	// first working note was replaced, as notes are).
	sum := func(s string) string { h := sha256.Sum256([]byte(s)); return hex.EncodeToString(h[:]) }
	refs := map[string]string{}
	var walk func(v any)
	walk = func(v any) {
		switch x := v.(type) {
		case map[string]any:
			in, ok1 := x["in"].(string)
			sha, ok2 := x["sha256"].(string)
			if ok1 && ok2 {
				refs[sha] = in
			}
			for _, y := range x {
				walk(y)
			}
		case []any:
			for _, y := range x {
				walk(y)
			}
		}
	}
	rows, err = f.s.Pool().Query(ctx, `SELECT old_value, new_value FROM audit_events`)
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var o, n []byte
		rows.Scan(&o, &n)
		for _, raw := range [][]byte{o, n} {
			var v any
			if json.Unmarshal(raw, &v) == nil {
				walk(v)
			}
		}
	}
	rows.Close()
	for k, text := range texts {
		in, ok := refs[sum(text)]
		if !ok {
			t.Errorf("%s: no audit event refers to the text's digest", k)
			continue
		}
		if k == "note" {
			continue // replaced since: the reference names where it was kept, which now holds note2
		}
		parts := strings.Split(in, "/")
		if len(parts) != 3 {
			t.Errorf("%s: reference %q", k, in)
			continue
		}
		var stored string
		if err := f.s.Pool().QueryRow(ctx, `SELECT `+parts[2]+`::text FROM `+parts[0]+` WHERE id = $1`, parts[1]).Scan(&stored); err != nil || stored != text {
			t.Errorf("%s: %s holds %q (%v), want the text", k, in, stored, err)
		}
	}

	tl, err := f.s.CaseTimeline(ctx, f.get(id), time.UTC)
	if err != nil {
		t.Fatal(err)
	}
	noteChanges := 0
	for _, e := range tl {
		for _, ch := range e.Changes {
			if ch.Field == "working note" {
				noteChanges++
			}
		}
	}
	if noteChanges != 2 {
		t.Errorf("the timeline shows %d changes of the working note, want 2", noteChanges)
	}
}

package db

import (
	"context"
	"encoding/json"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// The timeline of a case: everything that happened to it, as the case page
// lists it.

// CaseEventKind says what a timeline entry is about.
type CaseEventKind string

// The kinds of timeline entry.
const (
	EventChange    CaseEventKind = "change"    // an audited change of the case
	EventAttempt   CaseEventKind = "attempt"   // a contact attempt
	EventRecording CaseEventKind = "recording" // an ECG recording of the case
	EventOverRead  CaseEventKind = "over_read" // a clinician's over-read
	EventMessage   CaseEventKind = "message"   // a message the desk sent (outreach_messages.go)
)

// FieldChange is one field's old and new value as shown to people.
type FieldChange struct {
	Field, Before, After string
}

// RecordingRef is an ECG recording as the case timeline shows it.
type RecordingRef struct {
	ID                 int64
	TakenAt            time.Time
	DurationS          float64
	AutoInterpretation string
	TooShort           bool
	OverRead           bool // at least one over-read exists
}

// OverReadRef is an over-read as the case timeline shows it.
type OverReadRef struct {
	ID          int64
	RecordingID int64
	Role        string
	Rhythm      string
	Confidence  string
	Reader      string
	ReadOn      cohort.Date
	EnteredAt   time.Time // when the reading was entered, maybe days after ReadOn
}

// CaseEvent is one entry of a case's timeline.
type CaseEvent struct {
	At        time.Time
	Kind      CaseEventKind
	Actor     string
	Action    followup.Edit // the edit, for a change
	Changes   []FieldChange // what a change did
	Attempt   *Attempt
	Recording *RecordingRef
	OverRead  *OverReadRef
	Message   *Message
}

// CaseTimeline lists everything that happened to a case, newest first by when
// it happened (not when it was entered): the audited changes (an attempt's own
// entry stands in for its audit event), the contact attempts at their time,
// the recordings at the time they were taken and the over-reads on the day
// they were read. A reading entered on a later day than it was read stands at
// the end of its reading day in the study's zone, so a reading entered today
// for a recording read in October sits among October's events.
func (s *Store) CaseTimeline(ctx context.Context, c Case, loc *time.Location) ([]CaseEvent, error) {
	var out []CaseEvent
	// One round trip: the five reads are sent together.
	b := &pgx.Batch{}
	b.Queue(`
			SELECT at, actor, action, old_value, new_value FROM audit_events
			WHERE object_type = 'case' AND object_id = $1 AND action <> 'case.attempt'
			ORDER BY id`, strconv.FormatInt(c.ID, 10)).Query(func(rows pgx.Rows) error {
		for rows.Next() {
			e := CaseEvent{Kind: EventChange}
			var oldRaw, newRaw []byte
			var action string
			if err := rows.Scan(&e.At, &e.Actor, &action, &oldRaw, &newRaw); err != nil {
				return err
			}
			e.Action = followup.Edit(action)
			e.Changes = snapshotChanges(oldRaw, newRaw, loc)
			out = append(out, e)
		}
		return rows.Err()
	})
	b.Queue(attemptsSQL, c.ID).Query(func(rows pgx.Rows) error {
		attempts, err := scanAttempts(rows)
		for i := range attempts {
			out = append(out, CaseEvent{At: attempts[i].At, Kind: EventAttempt, Actor: attempts[i].Actor, Attempt: &attempts[i]})
		}
		return err
	})
	b.Queue(`
			SELECT r.id, r.taken_at, r.duration_s, r.auto_interpretation, r.too_short, r.created_by,
			       EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id)
			FROM recordings r WHERE r.case_id = $1`, c.ID).Query(func(rrows pgx.Rows) error {
		for rrows.Next() {
			var r RecordingRef
			var dur float32
			var by string
			if err := rrows.Scan(&r.ID, &r.TakenAt, &dur, &r.AutoInterpretation, &r.TooShort, &by, &r.OverRead); err != nil {
				return err
			}
			r.DurationS = float64(dur)
			out = append(out, CaseEvent{At: r.TakenAt, Kind: EventRecording, Actor: by, Recording: &r})
		}
		return rrows.Err()
	})
	b.Queue(`SELECT id, recording_id, role, rhythm, confidence, reader, read_on, created_at FROM over_reads WHERE case_id = $1`, c.ID).Query(func(orows pgx.Rows) error {
		for orows.Next() {
			var o OverReadRef
			var on, at time.Time
			if err := orows.Scan(&o.ID, &o.RecordingID, &o.Role, &o.Rhythm, &o.Confidence, &o.Reader, &on, &at); err != nil {
				return err
			}
			o.ReadOn, o.EnteredAt = cohort.DateOf(on), at
			happened := at
			if cohort.DateOf(at.In(loc)) != o.ReadOn {
				happened = o.ReadOn.AddDays(1).In(loc).Add(-time.Second)
			}
			out = append(out, CaseEvent{At: happened, Kind: EventOverRead, Actor: o.Reader, OverRead: &o})
		}
		return orows.Err()
	})
	b.Queue(`SELECT `+messageCols+` FROM `+messageFrom+` WHERE m.case_id = $1 ORDER BY m.id`, c.ID).Query(func(rows pgx.Rows) error {
		ms, err := collectMessages(rows, nil)
		for i := range ms {
			out = append(out, CaseEvent{At: ms[i].CreatedAt, Kind: EventMessage, Actor: ms[i].Actor, Message: &ms[i]})
		}
		return err
	})
	err := s.readBatch(ctx, b, func(pgx.BatchResults) error { return nil })
	if err != nil {
		return nil, mapErr("case timeline", err)
	}
	slices.SortStableFunc(out, func(a, b CaseEvent) int { return b.At.Compare(a.At) })
	return out, nil
}

// snapshotChanges lists the fields two audit snapshots of a case differ in,
// in a fixed order, with values as people read them.
func snapshotChanges(oldRaw, newRaw []byte, loc *time.Location) []FieldChange {
	var o, n caseSnapshot
	if len(oldRaw) > 0 {
		_ = json.Unmarshal(oldRaw, &o)
	}
	if len(newRaw) > 0 {
		_ = json.Unmarshal(newRaw, &n)
	}
	day := func(t *time.Time) string {
		if t == nil {
			return ""
		}
		return cohort.DateOf(t.In(loc)).Label()
	}
	state := func(s string) string {
		if s == "" {
			return ""
		}
		return followup.State(s).Label()
	}
	action := func(a string) string {
		if a == "" {
			return ""
		}
		return followup.Action(a).Label()
	}
	due := func(t *time.Time) string {
		if t == nil {
			return ""
		}
		return followup.NewCalendar(loc).DueDay(*t).DayLabel()
	}
	weeks := func(s caseSnapshot) string {
		if s.ID == 0 {
			return ""
		}
		if s.FirstWeek == s.LastWeek {
			return strconv.Itoa(s.FirstWeek)
		}
		return fmt.Sprintf("%d–%d", s.FirstWeek, s.LastWeek)
	}
	var out []FieldChange
	add := func(field, before, after string) {
		if before != after {
			out = append(out, FieldChange{field, before, after})
		}
	}
	add("state", state(o.State), state(n.State))
	add("owner", o.Owner, n.Owner)
	add("study weeks", weeks(o), weeks(n))
	add("next action", action(o.NextAction), action(n.NextAction))
	add("due by", due(o.DueAt), due(n.DueAt))
	add("reached", day(o.ReachedAt), day(n.ReachedAt))
	add("recorder sent", day(o.RecorderSentAt), day(n.RecorderSentAt))
	add("tracking number", o.TrackingNumber, n.TrackingNumber)
	add("recording back", day(o.RecordingBackAt), day(n.RecordingBackAt))
	add("over-read", day(o.OverReadAt), day(n.OverReadAt))
	addText("closing reason", o.ClosingNote, o.ClosingNoteRef, n.ClosingNote, n.ClosingNoteRef, add)
	addText("working note", o.Note, o.NoteRef, n.Note, n.NoteRef, add)
	if len(n.WeeksAdded) > 0 {
		ws := make([]string, len(n.WeeksAdded))
		for i, w := range n.WeeksAdded {
			ws[i] = strconv.Itoa(w)
		}
		out = append(out, FieldChange{"positive weeks added", "", strings.Join(ws, ", ")})
	}
	switch {
	case n.Reason != "" && n.Reason != n.ClosingNote: // an event written before free text was kept by reference
		out = append(out, FieldChange{"reason", "", n.Reason})
	case n.ReasonRef != nil && (n.ClosingNoteRef == nil || n.ReasonRef.SHA256 != n.ClosingNoteRef.SHA256):
		out = append(out, FieldChange{"reason", "", textGiven})
	}
	return out
}

// textGiven stands in the timeline for staff free text an event refers to:
// the trail keeps no copy (textRef); the case page shows the current text.
const textGiven = "(text given; the audit trail keeps no copy)"

// textBefore stands for the text a field held before a change.
const textBefore = "(earlier text)"

// addText adds a change of a free-text field between two snapshots, each of
// which holds the text (older events) or refers to it. The text is shown
// where the event holds it; a change between references shows that the
// text changed, not what it was.
func addText(field, oldText string, oldRef *textRef, newText string, newRef *textRef, add func(field, before, after string)) {
	digest := func(text string, ref *textRef) string {
		switch {
		case ref != nil:
			return ref.SHA256
		case text != "":
			return textDigest(text)
		}
		return ""
	}
	if digest(oldText, oldRef) == digest(newText, newRef) {
		return
	}
	shown := func(text string, ref *textRef, stand string) string {
		if ref != nil {
			return stand
		}
		return text
	}
	add(field, shown(oldText, oldRef, textBefore), shown(newText, newRef, textGiven))
}

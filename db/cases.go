package db

import (
	"context"
	"time"

	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// The follow-up case as the store reads it. The rules of a case live in
// cohort/followup; the store's part is in these files: the edit-and-audit
// engine (cases_edit.go), the edits people make (cases_actions.go), edits of
// many cases at once (cases_bulk.go), moves the system makes as the
// consequence of steps recorded elsewhere (cases_advance.go), deadlines
// (cases_schedule.go), cases opened from screening (cases_sync.go), and the
// read models of the lists and the case page (cases_list.go, cases_weeks.go,
// cases_timeline.go).

// Case is a follow-up case with everything the lists and the case page show.
// Zero times are unset.
type Case struct {
	ID               int64
	ParticipantID    int64
	StudyID          string
	SiteID           int
	SiteCode         string
	ProtocolID       int
	FirstWeek        int
	LastWeek         int
	State            followup.State
	OwnerID          int64 // 0 when nobody has taken the case on
	Owner            string
	FlaggedAt        time.Time
	NextAction       followup.Action // "" when nothing is due
	DueAt            time.Time
	ReachedAt        time.Time
	RecorderSentAt   time.Time
	TrackingNumber   string
	RecordingBackAt  time.Time
	OverReadAt       time.Time
	ClosedAt         time.Time
	ClosingNote      string
	Note             string // short working note (free text, never exported)
	Version          int
	UnreadRecordings int       // recordings of the case waiting for an over-read (overread.Awaits)
	OldestUnread     time.Time // when the oldest of them arrived
	FirstUnread      int64     // the one read first (the queue's order); 0 when none waits
}

// Fields are the case's user-edited fields as the conflict rules compare them.
// Deadlines are always computed here, so Due stays zero.
func (c Case) Fields() followup.CaseFields {
	return followup.CaseFields{State: c.State, Owner: c.Owner, Note: c.Note}
}

const caseCols = `c.id, c.participant_id, p.study_id, p.site_id, st.code, c.protocol_id, c.first_week, c.last_week, c.state,
	coalesce(c.owner_id, 0), coalesce(u.display_name, ''), c.flagged_at, c.next_action, c.due_at, c.reached_at,
	c.recorder_sent_at, c.tracking_number, c.recording_back_at, c.over_read_at, c.closed_at, c.closing_note, c.note, c.version,
	coalesce(rec.n, 0), rec.oldest, coalesce(rec.first, 0)`

// caseFrom joins what a case row shows. Recordings waiting for an over-read
// (awaitingRead) are counted for each case shown (an index on recordings by
// case, the over-read key by recording), so a page of cases costs what it
// shows, not what the study holds.
const caseFrom = `cases c
	JOIN participants p ON p.id = c.participant_id
	JOIN sites st ON st.id = p.site_id
	LEFT JOIN users u ON u.id = c.owner_id
	LEFT JOIN LATERAL (SELECT count(*) AS n, min(r.created_at) AS oldest,
	        (array_agg(r.id ORDER BY r.received_at, r.id))[1] AS first
	    FROM recordings r WHERE r.case_id = c.id AND ` + awaitingRead + `) rec ON true`

func timeOf(p *time.Time) time.Time {
	if p == nil {
		return time.Time{}
	}
	return *p
}

func timeArg(t time.Time) any {
	if t.IsZero() {
		return nil
	}
	return t
}

func scanCase(row pgx.Row, extra ...any) (Case, error) {
	var c Case
	var state, action string
	var fw, lw int16
	var due, reached, sent, back, read, closed, oldest *time.Time
	dest := []any{&c.ID, &c.ParticipantID, &c.StudyID, &c.SiteID, &c.SiteCode, &c.ProtocolID, &fw, &lw, &state,
		&c.OwnerID, &c.Owner, &c.FlaggedAt, &action, &due, &reached, &sent, &c.TrackingNumber, &back, &read, &closed,
		&c.ClosingNote, &c.Note, &c.Version, &c.UnreadRecordings, &oldest, &c.FirstUnread}
	if err := row.Scan(append(dest, extra...)...); err != nil {
		return c, err
	}
	c.FirstWeek, c.LastWeek = int(fw), int(lw)
	c.State, c.NextAction = followup.State(state), followup.Action(action)
	c.DueAt, c.ReachedAt, c.RecorderSentAt, c.RecordingBackAt = timeOf(due), timeOf(reached), timeOf(sent), timeOf(back)
	c.OverReadAt, c.ClosedAt, c.OldestUnread = timeOf(read), timeOf(closed), timeOf(oldest)
	return c, nil
}

// Case returns one case.
func (s *Store) Case(ctx context.Context, id int64) (Case, error) {
	c, err := scanCase(s.reader(ctx).QueryRow(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE c.id = $1`, id))
	return c, mapErr("case", err)
}

// lockCase reads a case and locks its row until the transaction ends.
func lockCase(ctx context.Context, tx pgx.Tx, id int64) (Case, error) {
	return scanCase(tx.QueryRow(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE c.id = $1 FOR UPDATE OF c`, id))
}

// Attempt is one logged contact attempt.
type Attempt struct {
	ID      int64
	At      time.Time
	Channel followup.Channel
	Outcome followup.Outcome
	Note    string         // free text: stays inside the system
	MovedTo followup.State // the state the attempt moved the case to, "" when none
	Actor   string
}

func caseAttempts(ctx context.Context, q interface {
	Query(context.Context, string, ...any) (pgx.Rows, error)
}, caseID int64) ([]Attempt, error) {
	rows, err := q.Query(ctx, attemptsSQL, caseID)
	if err != nil {
		return nil, err
	}
	return scanAttempts(rows)
}

// attemptsSQL reads a case's contact attempts ($1), oldest first.
const attemptsSQL = `SELECT id, at, channel, outcome, note, moved_to, actor FROM contact_attempts WHERE case_id = $1 ORDER BY at, id`

func scanAttempts(rows pgx.Rows) ([]Attempt, error) {
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (Attempt, error) {
		var a Attempt
		var ch, out, moved string
		err := r.Scan(&a.ID, &a.At, &ch, &out, &a.Note, &moved, &a.Actor)
		a.Channel, a.Outcome, a.MovedTo = followup.Channel(ch), followup.Outcome(out), followup.State(moved)
		return a, err
	})
}

// Attempts lists a case's contact attempts, oldest first.
func (s *Store) Attempts(ctx context.Context, caseID int64) ([]Attempt, error) {
	out, err := caseAttempts(ctx, s.pool, caseID)
	return out, mapErr("case attempts", err)
}

// facts gathers what the followup rules work from.
func facts(c Case, attempts []Attempt) followup.CaseFacts {
	f := followup.CaseFacts{State: c.State, FlaggedAt: c.FlaggedAt, ReachedAt: c.ReachedAt, RecorderSentAt: c.RecorderSentAt,
		RecordingReceivedAt: c.RecordingBackAt, OverReadAt: c.OverReadAt}
	for _, a := range attempts {
		f.Attempts = append(f.Attempts, followup.Attempt{At: a.At, Channel: a.Channel, Outcome: a.Outcome})
	}
	return f
}

// enter moves the case to state to at time at as followup.CaseFacts.Enter
// says, recording the time of the step the state stands for.
func (c *Case) enter(to followup.State, at time.Time) {
	f := facts(*c, nil)
	f.Enter(to, at)
	c.State, c.ReachedAt, c.RecorderSentAt, c.RecordingBackAt, c.OverReadAt = f.State, f.ReachedAt, f.RecorderSentAt, f.RecordingReceivedAt, f.OverReadAt
}

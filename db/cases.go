package db

import (
	"cmp"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

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
	UnreadRecordings int       // recordings of the case that have no over-read yet
	OldestUnread     time.Time // when the oldest of them arrived
}

// Fields are the case's user-edited fields as the conflict rules compare them.
// Deadlines are always computed here, so Due stays zero.
func (c Case) Fields() followup.CaseFields {
	return followup.CaseFields{State: c.State, Owner: c.Owner, Note: c.Note}
}

const caseCols = `c.id, c.participant_id, p.study_id, p.site_id, st.code, c.protocol_id, c.first_week, c.last_week, c.state,
	coalesce(c.owner_id, 0), coalesce(u.display_name, ''), c.flagged_at, c.next_action, c.due_at, c.reached_at,
	c.recorder_sent_at, c.tracking_number, c.recording_back_at, c.over_read_at, c.closed_at, c.closing_note, c.note, c.version,
	coalesce(rec.n, 0), rec.oldest`

// caseFrom joins what a case row shows. Recordings without an over-read are
// counted once per query and joined by case (a per-case lateral count cost
// 20 ms at 2,000 cases); a condition on c.id reaches the grouped subquery
// through the join, so one case's page reads only its own recordings.
const caseFrom = `cases c
	JOIN participants p ON p.id = c.participant_id
	JOIN sites st ON st.id = p.site_id
	LEFT JOIN users u ON u.id = c.owner_id
	LEFT JOIN (SELECT r.case_id, count(*) AS n, min(r.created_at) AS oldest FROM recordings r
	    WHERE NOT EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id)
	    GROUP BY r.case_id) rec ON rec.case_id = c.id`

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
		&c.ClosingNote, &c.Note, &c.Version, &c.UnreadRecordings, &oldest}
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
	c, err := scanCase(s.pool.QueryRow(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE c.id = $1`, id))
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
	rows, err := q.Query(ctx, `SELECT id, at, channel, outcome, note, moved_to, actor FROM contact_attempts WHERE case_id = $1 ORDER BY at, id`, caseID)
	if err != nil {
		return nil, err
	}
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

// facts gathers what followup.NextDue works from.
func facts(c Case, attempts []Attempt) followup.CaseFacts {
	f := followup.CaseFacts{State: c.State, FlaggedAt: c.FlaggedAt, ReachedAt: c.ReachedAt, RecorderSentAt: c.RecorderSentAt,
		RecordingReceivedAt: c.RecordingBackAt, OverReadAt: c.OverReadAt}
	for _, a := range attempts {
		f.Attempts = append(f.Attempts, followup.Attempt{At: a.At, Channel: a.Channel, Outcome: a.Outcome})
	}
	return f
}

// schedule sets the case's next action and deadline from the study's service
// levels and calendar; final cases have none.
func schedule(c *Case, attempts []Attempt, st StudySettings) {
	action, due, ok := followup.NextDue(facts(*c, attempts), st.Service, st.Calendar())
	if !ok {
		c.NextAction, c.DueAt = "", time.Time{}
		return
	}
	c.NextAction, c.DueAt = action, due
}

// caseSnapshot is a case as the audit trail keeps it: every field a person can
// change, with the version it produced, so the trail can say what any version
// looked like. No identifying details of the participant are in it.
type caseSnapshot struct {
	ID              int64          `json:"id"`
	ParticipantID   int64          `json:"participant_id"`
	StudyID         string         `json:"study_id"`
	ProtocolID      int            `json:"protocol_id"`
	FirstWeek       int            `json:"first_week"`
	LastWeek        int            `json:"last_week"`
	State           string         `json:"state"`
	OwnerID         int64          `json:"owner_id,omitempty"`
	Owner           string         `json:"owner,omitempty"`
	NextAction      string         `json:"next_action,omitempty"`
	DueAt           *time.Time     `json:"due_at,omitempty"`
	ReachedAt       *time.Time     `json:"reached_at,omitempty"`
	RecorderSentAt  *time.Time     `json:"recorder_sent_at,omitempty"`
	TrackingNumber  string         `json:"tracking_number,omitempty"`
	RecordingBackAt *time.Time     `json:"recording_back_at,omitempty"`
	OverReadAt      *time.Time     `json:"over_read_at,omitempty"`
	ClosedAt        *time.Time     `json:"closed_at,omitempty"`
	ClosingNote     string         `json:"closing_note,omitempty"`
	Note            string         `json:"note,omitempty"`
	Version         int            `json:"version"`
	Attempt         *attemptRecord `json:"attempt,omitempty"`
	WeeksAdded      []int          `json:"weeks_added,omitempty"`
	Reason          string         `json:"reason,omitempty"`
	Bulk            bool           `json:"bulk,omitempty"`
}

type attemptRecord struct {
	ID      int64     `json:"id"`
	At      time.Time `json:"at"`
	Channel string    `json:"channel"`
	Outcome string    `json:"outcome"`
	Note    string    `json:"note,omitempty"`
}

func ptrTime(t time.Time) *time.Time {
	if t.IsZero() {
		return nil
	}
	u := t.UTC()
	return &u
}

func snapshotOf(c Case) caseSnapshot {
	return caseSnapshot{ID: c.ID, ParticipantID: c.ParticipantID, StudyID: c.StudyID, ProtocolID: c.ProtocolID,
		FirstWeek: c.FirstWeek, LastWeek: c.LastWeek, State: string(c.State), OwnerID: c.OwnerID, Owner: c.Owner,
		NextAction: string(c.NextAction), DueAt: ptrTime(c.DueAt), ReachedAt: ptrTime(c.ReachedAt),
		RecorderSentAt: ptrTime(c.RecorderSentAt), TrackingNumber: c.TrackingNumber, RecordingBackAt: ptrTime(c.RecordingBackAt),
		OverReadAt: ptrTime(c.OverReadAt), ClosedAt: ptrTime(c.ClosedAt), ClosingNote: c.ClosingNote, Note: c.Note, Version: c.Version}
}

func (cs caseSnapshot) fields() followup.CaseFields {
	return followup.CaseFields{State: followup.State(cs.State), Owner: cs.Owner, Note: cs.Note}
}

// anyVersion lets the system edit a case whatever version it is at (closing
// cases after a withdrawal); people always name the version they saw.
const anyVersion = -1

// caseEdit is one kind of change to a case.
type caseEdit struct {
	action string // audit action
	// intent is what the person meant to set, applied to the fields they saw;
	// it words the conflict message when their copy was stale.
	intent func(base followup.CaseFields) followup.CaseFields
	// apply validates the change and makes it on next (a copy of the locked
	// row); it may write rows of its own (an attempt) and add to the audit
	// record.
	apply func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error
}

// editCase applies one change inside tx: lock, version check, change,
// reschedule, write, audit. It returns the case as stored.
func (s *Store) editCase(ctx context.Context, tx pgx.Tx, a cohort.Actor, id int64, version int, e caseEdit) (Case, error) {
	cur, err := lockCase(ctx, tx, id)
	if err != nil {
		return Case{}, err
	}
	if version != anyVersion && cur.Version != version {
		return Case{}, staleCase(ctx, tx, cur, version, e.intent)
	}
	next := cur
	var rec caseSnapshot
	if err := e.apply(ctx, tx, cur, &next, &rec); err != nil {
		return Case{}, err
	}
	now := s.now()
	switch {
	case next.State.Terminal() && next.ClosedAt.IsZero():
		next.ClosedAt = now
	case !next.State.Terminal():
		next.ClosedAt = time.Time{}
	}
	st, err := studySettings(ctx, tx)
	if err != nil {
		return Case{}, err
	}
	attempts, err := caseAttempts(ctx, tx, id)
	if err != nil {
		return Case{}, err
	}
	schedule(&next, attempts, st)
	var owner any
	if next.OwnerID != 0 {
		owner = next.OwnerID
	}
	err = tx.QueryRow(ctx, `
		UPDATE cases SET state = $2, owner_id = $3, next_action = $4, due_at = $5, reached_at = $6, recorder_sent_at = $7,
		  tracking_number = $8, recording_back_at = $9, over_read_at = $10, closed_at = $11, closing_note = $12, note = $13,
		  version = version + 1, updated_at = now()
		WHERE id = $1 RETURNING version`,
		id, string(next.State), owner, string(next.NextAction), timeArg(next.DueAt), timeArg(next.ReachedAt), timeArg(next.RecorderSentAt),
		next.TrackingNumber, timeArg(next.RecordingBackAt), timeArg(next.OverReadAt), timeArg(next.ClosedAt), next.ClosingNote, next.Note).
		Scan(&next.Version)
	if err != nil {
		return Case{}, err
	}
	nw := snapshotOf(next)
	nw.Attempt, nw.WeeksAdded, nw.Reason, nw.Bulk = rec.Attempt, rec.WeeksAdded, rec.Reason, rec.Bulk
	if err := audit(ctx, tx, a, e.action, "case", strconv.FormatInt(id, 10), snapshotOf(cur), nw); err != nil {
		return Case{}, err
	}
	return next, nil
}

// oneCaseEdit runs one edit in its own transaction.
func (s *Store) oneCaseEdit(ctx context.Context, a cohort.Actor, id int64, version int, e caseEdit) (Case, error) {
	var out Case
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		out, err = s.editCase(ctx, tx, a, id, version, e)
		return err
	})
	if err != nil {
		return Case{}, mapCaseErr(e.action, err)
	}
	return out, nil
}

// mapCaseErr keeps the domain's own errors as they are (their messages are
// meant for people) and maps driver errors.
func mapCaseErr(op string, err error) error {
	var ve *cohort.ValidationError
	var ce *cohort.ConflictError
	if errors.As(err, &ve) || errors.As(err, &ce) {
		return err
	}
	return mapErr(op, err)
}

// actionWords says in a few words what an audit action did, for conflict
// messages and the case timeline.
var actionWords = map[string]string{
	"case.open":           "opened the case",
	"case.extend":         "added screen-positive weeks",
	"case.late_weeks":     "recorded late positive weeks",
	"case.assign":         "changed the owner",
	"case.attempt":        "logged a contact attempt",
	"case.move":           "changed the state",
	"case.close":          "closed the case",
	"case.recorder_sent":  "recorded the recorder shipment",
	"case.recording_back": "recorded the recording's return",
	"case.note":           "changed the working note",
	"case.withdrawn":      "closed the case after the participant withdrew",
	"case.advance":        "moved the case on after a step recorded elsewhere",
}

// ActionWords is the wording of an audit action on a case, for the timeline.
func ActionWords(action string) string {
	if w, ok := actionWords[action]; ok {
		return w
	}
	return action
}

// staleCase builds the refusal of an edit based on an old version: what the
// person saw is read back from the audit trail (every version's fields are
// there), compared with what is stored now and with what they meant to do,
// and the message names the fields that changed and who changed the case.
func staleCase(ctx context.Context, tx pgx.Tx, cur Case, version int, intent func(followup.CaseFields) followup.CaseFields) error {
	theirs := cur.Fields()
	var who []string
	rows, err := tx.Query(ctx, `
		SELECT actor, action FROM audit_events
		WHERE object_type = 'case' AND object_id = $1 AND (new_value->>'version')::int > $2
		ORDER BY id`, strconv.FormatInt(cur.ID, 10), version)
	if err != nil {
		return err
	}
	for rows.Next() {
		var actor, action string
		if err := rows.Scan(&actor, &action); err != nil {
			rows.Close()
			return err
		}
		w := actor + " " + ActionWords(action)
		if !slices.Contains(who, w) {
			who = append(who, w)
		}
	}
	if err := rows.Err(); err != nil {
		return err
	}
	var raw []byte
	err = tx.QueryRow(ctx, `
		SELECT new_value FROM audit_events
		WHERE object_type = 'case' AND object_id = $1 AND (new_value->>'version')::int = $2
		ORDER BY id LIMIT 1`, strconv.FormatInt(cur.ID, 10), version).Scan(&raw)
	var ce *cohort.ConflictError
	if err == nil {
		var base caseSnapshot
		if json.Unmarshal(raw, &base) == nil {
			yours := intent(base.fields())
			ce = followup.Conflict(base.fields(), theirs, yours)
			if ce == nil {
				// Nothing the person was about to set collides, but the case
				// moved on (an attempt, a shipment): their choice may rest on
				// what they saw, so they look again before it is applied.
				shown := followup.Diff(followup.CaseFields{}, yours)
				changes := map[string][2]string{}
				var parts []string
				for f, v := range followup.Diff(base.fields(), theirs) {
					changes[f] = [2]string{v[1], shown[f][1]}
					parts = append(parts, fmt.Sprintf("%s is now %q", f, v[1]))
				}
				slices.Sort(parts)
				msg := "someone else changed this case after you opened it"
				if len(parts) > 0 {
					msg += " (" + strings.Join(parts, "; ") + ")"
				}
				ce = &cohort.ConflictError{Message: msg + "; check their changes and try again", Changes: changes}
			}
		}
	} else if !errors.Is(err, pgx.ErrNoRows) {
		return err
	}
	if ce == nil {
		ce = &cohort.ConflictError{Message: fmt.Sprintf("this case is at version %d, not the version %d you opened; reload it and try again", cur.Version, version)}
	}
	if len(who) > 0 {
		ce.Message = strings.TrimSuffix(ce.Message, ".") + ". Since you opened it: " + strings.Join(who, "; ") + "."
	}
	return ce
}

// stateIntent and the other intents say what a person meant to change.
func stateIntent(to followup.State) func(followup.CaseFields) followup.CaseFields {
	return func(b followup.CaseFields) followup.CaseFields { b.State = to; return b }
}

// enterState records the time of the step a state stands for, when the case
// reaches it, so the next deadline counts from it. Going back from
// "recording received" to "recorder sent" is a repeat shipment: its time is
// the new shipment and the returned recording is no longer awaited.
func enterState(c *Case, from, to followup.State, at time.Time) {
	switch to {
	case followup.Reached:
		if c.ReachedAt.IsZero() {
			c.ReachedAt = at
		}
	case followup.RecorderSent:
		if from == followup.RecordingReceived || c.RecorderSentAt.IsZero() {
			c.RecorderSentAt = at
		}
		if from == followup.RecordingReceived {
			c.RecordingBackAt = time.Time{}
		}
	case followup.RecordingReceived:
		if c.RecordingBackAt.IsZero() {
			c.RecordingBackAt = at
		}
	case followup.OverRead:
		if c.OverReadAt.IsZero() {
			c.OverReadAt = at
		}
	}
	c.State = to
}

// AssignCase gives the case to a person (ownerID 0: to nobody). The person
// must have an active account whose role works cases.
func (s *Store) AssignCase(ctx context.Context, a cohort.Actor, id int64, version int, ownerID int64) (Case, error) {
	return s.oneCaseEdit(ctx, a, id, version, s.assignEdit(s.userName(ctx, ownerID), ownerID, false))
}

// userName is the display name of an account, "" when unknown; it only words
// conflict messages, so a failed read is not an error.
func (s *Store) userName(ctx context.Context, id int64) string {
	var name string
	if id != 0 {
		_ = s.pool.QueryRow(ctx, `SELECT display_name FROM users WHERE id = $1`, id).Scan(&name)
	}
	return name
}

// assignEdit gives a case to ownerID; name is that person's name as the
// caller knows it, for the conflict message.
func (s *Store) assignEdit(name string, ownerID int64, bulk bool) caseEdit {
	return caseEdit{
		action: "case.assign",
		intent: func(b followup.CaseFields) followup.CaseFields { b.Owner = name; return b },
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			rec.Bulk = bulk
			if ownerID == 0 {
				next.OwnerID, next.Owner = 0, ""
				return nil
			}
			u, err := caseWorker(ctx, tx, ownerID)
			if err != nil {
				return err
			}
			next.OwnerID, next.Owner = u.ID, u.Name
			return nil
		},
	}
}

// worksCases is the rule for who may own a case: the roles that see PHI and
// work cases.
func worksCases(r cohort.Role) bool {
	return r == cohort.Coordinator || r == cohort.Investigator || r == cohort.Admin
}

func caseWorker(ctx context.Context, tx pgx.Tx, id int64) (User, error) {
	rows, err := tx.Query(ctx, `SELECT `+userCols+` FROM users WHERE id = $1`, id)
	if err != nil {
		return User{}, err
	}
	u, err := pgx.CollectExactlyOneRow(rows, scanUser)
	if errors.Is(err, pgx.ErrNoRows) || (err == nil && (!u.Active || !worksCases(u.Role))) {
		return User{}, &cohort.ValidationError{Fields: map[string]string{"owner": "choose an active coordinator, investigator or administrator"}}
	}
	return u, err
}

// CaseWorkers lists the active accounts a case may be assigned to, by name.
func (s *Store) CaseWorkers(ctx context.Context) ([]User, error) {
	rows, err := s.pool.Query(ctx, `SELECT `+userCols+` FROM users WHERE active AND role IN ('coordinator', 'investigator', 'admin') ORDER BY display_name, id`)
	if err != nil {
		return nil, mapErr("case workers", err)
	}
	out, err := pgx.CollectRows(rows, scanUser)
	return out, mapErr("case workers", err)
}

// AttemptInput is a contact attempt as a form submits it.
type AttemptInput struct {
	Version int
	Channel string
	Outcome string
	Note    string
	At      string // "YYYY-MM-DDTHH:MM" in the study's zone; empty means now
}

// attemptSkew is how far in the future an attempt time may lie: clocks of
// staff computers drift a little.
const attemptSkew = 5 * time.Minute

// LogAttempt records a contact attempt and moves the case as
// followup.AfterAttempt says (reached, declined, first attempt).
func (s *Store) LogAttempt(ctx context.Context, a cohort.Actor, id int64, in AttemptInput) (Case, error) {
	return s.oneCaseEdit(ctx, a, id, in.Version, s.attemptEdit(a, in, false))
}

func (s *Store) attemptEdit(a cohort.Actor, in AttemptInput, bulk bool) caseEdit {
	outcome := followup.Outcome(strings.TrimSpace(in.Outcome))
	return caseEdit{
		action: "case.attempt",
		intent: func(b followup.CaseFields) followup.CaseFields {
			if next, move, err := followup.AfterAttempt(b.State, outcome); err == nil && move {
				b.State = next
			}
			return b
		},
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			st, err := studySettings(ctx, tx)
			if err != nil {
				return err
			}
			var ve cohort.ValidationError
			ch, err := followup.ParseChannel(in.Channel)
			if err != nil {
				ve.Add("channel", "choose how you tried to reach the participant")
			}
			out, err := followup.ParseOutcome(in.Outcome)
			if err != nil {
				ve.Add("outcome", "choose what came of the attempt")
			}
			note := strings.TrimSpace(in.Note)
			if len(note) > 2000 {
				ve.Add("note", "use at most 2000 characters")
			}
			at := s.now()
			if strings.TrimSpace(in.At) != "" {
				t, err := time.ParseInLocation("2006-01-02T15:04", strings.TrimSpace(in.At), st.Location())
				switch {
				case err != nil:
					ve.Add("at", "enter the time as YYYY-MM-DD HH:MM")
				case t.After(s.now().Add(attemptSkew)):
					ve.Add("at", "the attempt time is in the future")
				case t.Before(cur.FlaggedAt.Truncate(time.Minute)):
					ve.Add("at", "the attempt time is before the case was flagged ("+cur.FlaggedAt.In(st.Location()).Format("2006-01-02 15:04")+")")
				default:
					at = t
				}
			}
			if err := ve.Err(); err != nil {
				return err
			}
			to, move, err := followup.AfterAttempt(cur.State, out)
			if err != nil {
				return err
			}
			moved := ""
			if move {
				if err := followup.Move(cur.State, to); err != nil {
					return err
				}
				enterState(next, cur.State, to, at)
				if out == followup.OutcomeReached {
					next.ReachedAt = at
				}
				if to.Terminal() {
					next.ClosingNote = "declined when contacted (" + ch.Label() + ")"
				}
				moved = string(to)
			}
			var actorID *int64
			if a.UserID != 0 {
				actorID = &a.UserID
			}
			r := &attemptRecord{At: at.UTC(), Channel: string(ch), Outcome: string(out), Note: note}
			if err := tx.QueryRow(ctx, `
				INSERT INTO contact_attempts (case_id, participant_id, at, channel, outcome, note, moved_to, actor_id, actor)
				VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9) RETURNING id`,
				cur.ID, cur.ParticipantID, at, string(ch), string(out), note, moved, actorID, a.Label()).Scan(&r.ID); err != nil {
				return err
			}
			rec.Attempt, rec.Bulk = r, bulk
			return nil
		},
	}
}

// MoveInput is a requested change of state.
type MoveInput struct {
	Version int
	To      string
	Reason  string // required when the new state is final
}

// MoveCase changes the state as the state table allows; a refused move's
// message names the allowed next states. Reaching a step records its time.
func (s *Store) MoveCase(ctx context.Context, a cohort.Actor, id int64, in MoveInput) (Case, error) {
	return s.oneCaseEdit(ctx, a, id, in.Version, s.moveEdit("case.move", in, false))
}

// CloseCase ends a case in one of the final states, with the reason.
func (s *Store) CloseCase(ctx context.Context, a cohort.Actor, id int64, in MoveInput) (Case, error) {
	return s.oneCaseEdit(ctx, a, id, in.Version, s.moveEdit("case.close", in, true))
}

func (s *Store) moveEdit(action string, in MoveInput, closing bool) caseEdit {
	to := followup.State(strings.TrimSpace(in.To))
	return caseEdit{
		action: action,
		intent: stateIntent(to),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			if closing && !to.Terminal() {
				var finals []string
				for _, n := range followup.Next(cur.State) {
					if n.Terminal() {
						finals = append(finals, n.Label())
					}
				}
				msg := "choose how the case ends"
				if len(finals) > 0 {
					msg += ": " + strings.Join(finals, ", ")
				}
				return &cohort.ValidationError{Fields: map[string]string{"state": msg}}
			}
			if err := followup.Move(cur.State, to); err != nil {
				return err
			}
			reason := strings.TrimSpace(in.Reason)
			switch {
			case to.Terminal() && reason == "":
				return &cohort.ValidationError{Fields: map[string]string{"reason": "say why the case ends this way"}}
			case len(reason) > 1000:
				return &cohort.ValidationError{Fields: map[string]string{"reason": "use at most 1000 characters"}}
			}
			enterState(next, cur.State, to, s.now())
			if to.Terminal() {
				next.ClosingNote = reason
			}
			rec.Reason = reason
			return nil
		},
	}
}

// dayTime turns a day entered on a form into the instant stored for it: now
// when it is today in the study's zone, else noon of that day, which keeps the
// right day in every zone and orders after morning events of the same day.
func dayTime(d cohort.Date, now time.Time, loc *time.Location) time.Time {
	if cohort.DateOf(now.In(loc)) == d {
		return now
	}
	return time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, loc)
}

// parseDay reads a form date that must not lie in the future nor before the
// day of an earlier step.
func parseDay(field, v string, now time.Time, loc *time.Location, notBefore time.Time, notBeforeWhat string) (cohort.Date, error) {
	d, err := cohort.ParseDate(v)
	if err != nil {
		return d, &cohort.ValidationError{Fields: map[string]string{field: "enter the date as YYYY-MM-DD"}}
	}
	if cohort.DateOf(now.In(loc)).Before(d) {
		return d, &cohort.ValidationError{Fields: map[string]string{field: "the date is in the future"}}
	}
	if !notBefore.IsZero() {
		if first := cohort.DateOf(notBefore.In(loc)); d.Before(first) {
			return d, &cohort.ValidationError{Fields: map[string]string{field: "the date is before " + notBeforeWhat + " (" + first.String() + ")"}}
		}
	}
	return d, nil
}

// RecordShipment records that the recorder went out (date, tracking number)
// and moves a reached case to "recorder sent". On a case already in "recorder
// sent" it corrects the date and tracking number.
func (s *Store) RecordShipment(ctx context.Context, a cohort.Actor, id int64, version int, sentOn, tracking string) (Case, error) {
	return s.oneCaseEdit(ctx, a, id, version, caseEdit{
		action: "case.recorder_sent",
		intent: stateIntent(followup.RecorderSent),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			if cur.State != followup.RecorderSent {
				if err := followup.Move(cur.State, followup.RecorderSent); err != nil {
					return err
				}
			}
			st, err := studySettings(ctx, tx)
			if err != nil {
				return err
			}
			tracking = strings.TrimSpace(tracking)
			if len(tracking) > 64 {
				return &cohort.ValidationError{Fields: map[string]string{"tracking_number": "use at most 64 characters"}}
			}
			loc := st.Location()
			d, err := parseDay("sent_on", sentOn, s.now(), loc, cur.ReachedAt, "the participant was reached")
			if err != nil {
				return err
			}
			enterState(next, cur.State, followup.RecorderSent, s.now())
			next.RecorderSentAt, next.TrackingNumber = dayTime(d, s.now(), loc), tracking
			return nil
		},
	})
}

// RecordReturn records the day the recording came back and moves the case to
// "recording received".
func (s *Store) RecordReturn(ctx context.Context, a cohort.Actor, id int64, version int, backOn string) (Case, error) {
	return s.oneCaseEdit(ctx, a, id, version, caseEdit{
		action: "case.recording_back",
		intent: stateIntent(followup.RecordingReceived),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			if err := followup.Move(cur.State, followup.RecordingReceived); err != nil {
				return err
			}
			st, err := studySettings(ctx, tx)
			if err != nil {
				return err
			}
			loc := st.Location()
			d, err := parseDay("back_on", backOn, s.now(), loc, cur.RecorderSentAt, "the recorder was sent")
			if err != nil {
				return err
			}
			enterState(next, cur.State, followup.RecordingReceived, s.now())
			next.RecordingBackAt = dayTime(d, s.now(), loc)
			return nil
		},
	})
}

// SetCaseNote changes the short working note shown on the lists.
func (s *Store) SetCaseNote(ctx context.Context, a cohort.Actor, id int64, version int, note string) (Case, error) {
	note = strings.TrimSpace(note)
	return s.oneCaseEdit(ctx, a, id, version, caseEdit{
		action: "case.note",
		intent: func(b followup.CaseFields) followup.CaseFields { b.Note = note; return b },
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			if len(note) > 500 {
				return &cohort.ValidationError{Fields: map[string]string{"note": "use at most 500 characters"}}
			}
			next.Note = note
			return nil
		},
	})
}

// CaseRef names a case and the version the person saw, for bulk actions.
type CaseRef struct {
	ID      int64
	Version int
}

// maxBulk bounds one bulk request; a page of the case list holds fewer.
const maxBulk = 500

// bulk applies one edit to many cases in one transaction: all or nothing. The
// cases are locked in id order so two bulk requests cannot deadlock.
func (s *Store) bulk(ctx context.Context, a cohort.Actor, refs []CaseRef, edit func() caseEdit) (int, error) {
	if len(refs) == 0 {
		return 0, &cohort.ValidationError{Fields: map[string]string{"cases": "select at least one case"}}
	}
	if len(refs) > maxBulk {
		return 0, &cohort.ValidationError{Fields: map[string]string{"cases": fmt.Sprintf("select at most %d cases at once", maxBulk)}}
	}
	refs = slices.Clone(refs)
	slices.SortFunc(refs, func(x, y CaseRef) int { return cmp.Compare(x.ID, y.ID) })
	refs = slices.CompactFunc(refs, func(x, y CaseRef) bool { return x.ID == y.ID })
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		for _, r := range refs {
			if _, err := s.editCase(ctx, tx, a, r.ID, r.Version, edit()); err != nil {
				return bulkErr(r.ID, err)
			}
		}
		return nil
	})
	if err != nil {
		return 0, mapCaseErr("bulk case edit", err)
	}
	return len(refs), nil
}

// bulkErr names the case an error in a bulk request is about.
func bulkErr(id int64, err error) error {
	prefix := fmt.Sprintf("case %d: ", id)
	var ve *cohort.ValidationError
	var ce *cohort.ConflictError
	switch {
	case errors.As(err, &ce):
		return &cohort.ConflictError{Message: prefix + ce.Message + " Nothing was changed.", Changes: ce.Changes}
	case errors.As(err, &ve):
		out := &cohort.ValidationError{}
		for f, m := range ve.Fields {
			out.Add(f, prefix+m)
		}
		out.Add("cases", prefix+ve.Error())
		return out
	case errors.Is(err, pgx.ErrNoRows):
		return &cohort.ValidationError{Fields: map[string]string{"cases": prefix + "no such case"}}
	}
	return err
}

// AssignCases gives many cases to one person (ownerID 0: to nobody), each
// change audited, all or nothing.
func (s *Store) AssignCases(ctx context.Context, a cohort.Actor, refs []CaseRef, ownerID int64) (int, error) {
	name := s.userName(ctx, ownerID)
	return s.bulk(ctx, a, refs, func() caseEdit { return s.assignEdit(name, ownerID, true) })
}

// LetterNote is the note of a letter logged in bulk.
const LetterNote = "letter sent"

// LogLetters records "letter sent" on many cases: an attempt by letter whose
// outcome is a message left, since a letter asks the participant to get in
// touch and has had no answer yet. Each is audited; all or nothing.
func (s *Store) LogLetters(ctx context.Context, a cohort.Actor, refs []CaseRef, note string) (int, error) {
	note = strings.TrimSpace(LetterNote + "; " + strings.TrimSpace(note))
	note = strings.TrimSuffix(note, ";")
	return s.bulk(ctx, a, refs, func() caseEdit {
		return s.attemptEdit(a, AttemptInput{Channel: string(followup.ChannelLetter), Outcome: string(followup.OutcomeMessageLeft), Note: note}, true)
	})
}

// CloseCasesForWithdrawal closes every case of the participant that is still
// being worked as "closed (withdrawn)", each audited. It is the system's
// consequence of a recorded withdrawal, so it applies to whatever version the
// cases are at.
func (s *Store) CloseCasesForWithdrawal(ctx context.Context, a cohort.Actor, participantID int64) (int, error) {
	n := 0
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `SELECT id FROM cases WHERE participant_id = $1 AND closed_at IS NULL ORDER BY id`, participantID)
		if err != nil {
			return err
		}
		ids, err := pgx.CollectRows(rows, pgx.RowTo[int64])
		if err != nil {
			return err
		}
		for _, id := range ids {
			_, err := s.editCase(ctx, tx, a, id, anyVersion, caseEdit{
				action: "case.withdrawn",
				intent: stateIntent(followup.ClosedWithdrawn),
				apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
					if err := followup.Move(cur.State, followup.ClosedWithdrawn); err != nil {
						return err
					}
					enterState(next, cur.State, followup.ClosedWithdrawn, s.now())
					next.ClosingNote = "the participant withdrew from the study"
					return nil
				},
			})
			if err != nil {
				return err
			}
			n++
		}
		return nil
	})
	if err != nil {
		return 0, mapCaseErr("close cases after withdrawal", err)
	}
	return n, nil
}

// AdvanceCase moves a case as the consequence of a step recorded elsewhere
// (a recording uploaded, an interpretable over-read entered, a referral
// issued), whatever version the case is at: whoever caused it did not edit the
// case, so there is no stale copy to refuse. A case already in to is left as
// it is; a move the state table does not allow is refused with the allowed
// states named, as for people. at is when the step happened (zero: now);
// a final state needs a reason. Audited as "case.advance".
func (s *Store) AdvanceCase(ctx context.Context, a cohort.Actor, id int64, to followup.State, at time.Time, reason string) (Case, error) {
	var out Case
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		out, err = s.advanceCase(ctx, tx, a, id, to, at, reason)
		return err
	})
	if err != nil {
		return Case{}, mapCaseErr("advance case", err)
	}
	return out, nil
}

// advanceCase is AdvanceCase inside the caller's transaction, for steps that
// must commit together with the move (a referral's sign-off).
func (s *Store) advanceCase(ctx context.Context, tx pgx.Tx, a cohort.Actor, id int64, to followup.State, at time.Time, reason string) (Case, error) {
	cur, err := lockCase(ctx, tx, id)
	if err != nil {
		return Case{}, err
	}
	if cur.State == to {
		return cur, nil
	}
	return s.editCase(ctx, tx, a, id, anyVersion, caseEdit{
		action: "case.advance",
		intent: stateIntent(to),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			if err := followup.Move(cur.State, to); err != nil {
				return err
			}
			reason = strings.TrimSpace(reason)
			if to.Terminal() && reason == "" {
				return &cohort.ValidationError{Fields: map[string]string{"reason": "say why the case ends this way"}}
			}
			when := at
			if when.IsZero() {
				when = s.now()
			}
			enterState(next, cur.State, to, when)
			if to.Terminal() {
				next.ClosingNote = reason
			}
			rec.Reason = reason
			return nil
		},
	})
}

// rescheduleOpenCases recomputes the next action and deadline of every case
// still being worked under new settings. Deadlines are derived values, so the
// version does not change and no edit in progress is refused because of it.
// It returns how many deadlines changed.
func (s *Store) rescheduleOpenCases(ctx context.Context, tx pgx.Tx, st StudySettings) (int, error) {
	rows, err := tx.Query(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE c.closed_at IS NULL ORDER BY c.id FOR UPDATE OF c`)
	if err != nil {
		return 0, err
	}
	cases, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Case, error) { return scanCase(r) })
	if err != nil {
		return 0, err
	}
	byCase, err := attemptsOf(ctx, tx, `SELECT case_id, at, channel, outcome FROM contact_attempts
		WHERE case_id IN (SELECT id FROM cases WHERE closed_at IS NULL)`)
	if err != nil {
		return 0, err
	}
	n := 0
	for _, c := range cases {
		old := c
		schedule(&c, byCase[c.ID], st)
		if c.NextAction == old.NextAction && c.DueAt.Equal(old.DueAt) {
			continue
		}
		if _, err := tx.Exec(ctx, `UPDATE cases SET next_action = $2, due_at = $3 WHERE id = $1`, c.ID, string(c.NextAction), timeArg(c.DueAt)); err != nil {
			return 0, err
		}
		n++
	}
	return n, nil
}

// attemptsOf reads (case_id, at, channel, outcome) rows into attempts by case.
func attemptsOf(ctx context.Context, tx pgx.Tx, sql string, args ...any) (map[int64][]Attempt, error) {
	rows, err := tx.Query(ctx, sql, args...)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	out := map[int64][]Attempt{}
	for rows.Next() {
		var id int64
		var a Attempt
		var ch, o string
		if err := rows.Scan(&id, &a.At, &ch, &o); err != nil {
			return nil, err
		}
		a.Channel, a.Outcome = followup.Channel(ch), followup.Outcome(o)
		out[id] = append(out[id], a)
	}
	return out, rows.Err()
}

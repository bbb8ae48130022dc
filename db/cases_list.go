package db

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/screen"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"
)

// CaseFilter narrows the case list.
type CaseFilter struct {
	State   string // "" or "working": cases still being worked; "final": ended ones; "all"; or one state's value
	OwnerID int64  // > 0: that person's cases
	Unowned bool   // cases nobody has taken on
	Overdue bool   // deadline passed
	SiteID  int
	After   string // opaque keyset cursor from the previous page
	Limit   int
}

// CasePage is one page of the case list, ordered by deadline (cases with
// nothing due last), then id.
type CasePage struct {
	Rows  []Case
	Next  string // cursor of the next page, "" at the end
	Total int64  // cases matching the filter
}

// caseOrder is the list's sort key; an expression index serves it.
const caseOrder = `coalesce(c.due_at, 'infinity'::timestamptz)`

func (f CaseFilter) where(now time.Time) (string, []any, error) {
	conds := []string{"true"}
	var args []any
	arg := func(v any) string { args = append(args, v); return "$" + strconv.Itoa(len(args)) }
	switch f.State {
	case "", "working":
		conds = append(conds, "c.closed_at IS NULL")
	case "final":
		conds = append(conds, "c.closed_at IS NOT NULL")
	case "all":
	default:
		st, err := followup.ParseState(f.State)
		if err != nil {
			return "", nil, &cohort.ValidationError{Fields: map[string]string{"state": "choose a state from the list"}}
		}
		conds = append(conds, "c.state = "+arg(string(st)))
	}
	if f.OwnerID > 0 {
		conds = append(conds, "c.owner_id = "+arg(f.OwnerID))
	}
	if f.Unowned {
		conds = append(conds, "c.owner_id IS NULL")
	}
	if f.Overdue {
		conds = append(conds, "c.due_at <= "+arg(now))
	}
	if f.SiteID > 0 {
		conds = append(conds, "p.site_id = "+arg(f.SiteID))
	}
	return strings.Join(conds, " AND "), args, nil
}

// Cases returns one page of the filtered case list with keyset pagination.
func (s *Store) Cases(ctx context.Context, f CaseFilter) (CasePage, error) {
	if f.Limit <= 0 || f.Limit > 500 {
		f.Limit = 50
	}
	var page CasePage
	where, args, err := f.where(s.now())
	if err != nil {
		return page, err
	}
	if err := s.pool.QueryRow(ctx, `SELECT count(*) FROM cases c JOIN participants p ON p.id = c.participant_id WHERE `+where, args...).Scan(&page.Total); err != nil {
		return page, mapErr("cases count", err)
	}
	if c, ok := decodeCursor(f.After); ok {
		args = append(args, c.Key, c.ID)
		where += fmt.Sprintf(" AND (%s, c.id) > ($%d::timestamptz, $%d)", caseOrder, len(args)-1, len(args))
	}
	args = append(args, f.Limit+1)
	rows, err := s.pool.Query(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE `+where+
		fmt.Sprintf(` ORDER BY %s, c.id LIMIT $%d`, caseOrder, len(args)), args...)
	if err != nil {
		return page, mapErr("cases", err)
	}
	page.Rows, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (Case, error) { return scanCase(r) })
	if err != nil {
		return page, mapErr("cases", err)
	}
	if len(page.Rows) > f.Limit {
		page.Rows = page.Rows[:f.Limit]
		last := page.Rows[f.Limit-1]
		key := "infinity"
		if !last.DueAt.IsZero() {
			key = last.DueAt.UTC().Format(time.RFC3339Nano)
		}
		page.Next = encodeCursor(cursor{Key: key, ID: last.ID})
	}
	return page, nil
}

// TriageRow is a case with its place in the triage order.
type TriageRow struct {
	Case
	Bucket followup.Bucket
}

// Triage is the coordinators' work list at one moment.
type Triage struct {
	Rows             []TriageRow // most urgent first (followup.SortTriage); per group at most the limit asked for
	Counts           map[followup.Bucket]int
	UnreadRecordings int // recordings of the working cases without an over-read
	Now              time.Time
	Settings         StudySettings
}

// Triage orders the cases still being worked by followup.Urgency at the
// store's now, in the study's time zone, counts every group, and returns the
// first perGroup cases of each urgent group in full (all of them when
// perGroup <= 0). Cases on schedule (followup.BucketOther) are counted, not
// returned: the triage page does not list them, the case list does.
//
// The order needs only a few fields of every case, so those are read for all
// cases and the full rows only for the cases returned: at 2,000 working cases
// this halves the time of the page. The reads need no common snapshot (a case
// changed in between shows as it now is), so they run outside a transaction.
func (s *Store) Triage(ctx context.Context, perGroup int) (Triage, error) {
	var t Triage
	var items []followup.TriageItem
	err := func() error {
		var err error
		if t.Settings, err = studySettings(ctx, s.pool); err != nil {
			return err
		}
		rows, err := s.pool.Query(ctx, `
			SELECT c.id, p.study_id, c.state, coalesce(u.display_name, ''), c.flagged_at, c.due_at,
			       coalesce(c.recording_back_at, rec.oldest), coalesce(rec.n, 0)
			FROM `+caseFrom+` WHERE c.closed_at IS NULL`)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var id int64
			var it followup.TriageItem
			var state string
			var due, received pgtype.Timestamptz
			var n int
			if err := rows.Scan(&id, &it.StudyID, &state, &it.Owner, &it.FlaggedAt, &due, &received, &n); err != nil {
				return err
			}
			it.CaseID, it.State, it.Due, it.RecordingReceivedAt = strconv.FormatInt(id, 10), followup.State(state), due.Time, received.Time
			items = append(items, it)
			t.UnreadRecordings += n
		}
		return rows.Err()
	}()
	if err != nil {
		return t, mapErr("triage", err)
	}
	t.Now = s.now().In(t.Settings.Location())
	followup.SortTriage(items, t.Now)
	t.Counts = map[followup.Bucket]int{}
	var ids []int64
	var buckets []followup.Bucket
	for _, it := range items {
		b := followup.Urgency(it, t.Now).Bucket
		t.Counts[b]++
		if b != followup.BucketOther && (perGroup <= 0 || t.Counts[b] <= perGroup) {
			id, _ := strconv.ParseInt(it.CaseID, 10, 64)
			ids, buckets = append(ids, id), append(buckets, b)
		}
	}
	if len(ids) == 0 {
		return t, nil
	}
	rows, err := s.pool.Query(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE c.id = ANY($1)`, ids)
	if err != nil {
		return t, mapErr("triage", err)
	}
	cases, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Case, error) { return scanCase(r) })
	if err != nil {
		return t, mapErr("triage", err)
	}
	byID := make(map[int64]Case, len(cases))
	for _, c := range cases {
		byID[c.ID] = c
	}
	for i, id := range ids {
		if c, ok := byID[id]; ok { // a case closed in between drops out
			t.Rows = append(t.Rows, TriageRow{Case: c, Bucket: buckets[i]})
		}
	}
	return t, nil
}

// TriageCase places one case (final or not) in the triage order, for updating
// its row on the page after an action.
func (s *Store) TriageCase(ctx context.Context, id int64) (Triage, error) {
	c, err := s.Case(ctx, id)
	if err != nil {
		return Triage{}, err
	}
	st, err := s.StudySettings(ctx)
	if err != nil {
		return Triage{}, err
	}
	t := Triage{Settings: st, Now: s.now().In(st.Location()), UnreadRecordings: c.UnreadRecordings}
	b := followup.Urgency(triageItem(c), t.Now).Bucket
	t.Rows = []TriageRow{{Case: c, Bucket: b}}
	t.Counts = map[followup.Bucket]int{b: 1}
	return t, nil
}

// triageItem is the case as the triage order sees it. A recording that came
// in without its return being recorded still dates the wait for an over-read.
func triageItem(c Case) followup.TriageItem {
	received := c.RecordingBackAt
	if received.IsZero() {
		received = c.OldestUnread
	}
	return followup.TriageItem{CaseID: strconv.FormatInt(c.ID, 10), StudyID: c.StudyID, State: c.State, Owner: c.Owner,
		FlaggedAt: c.FlaggedAt, RecordingReceivedAt: received, Due: c.DueAt}
}

// Metric is one value of a screening result, for display.
type Metric struct {
	Name  string
	Value string
}

// FlaggedWeek is one screen-positive participant-week with its metrics.
type FlaggedWeek struct {
	ProtocolID      int
	ProtocolName    string
	ProtocolVersion int
	Week            int
	Reason          string
	WearHours       float64
	Metrics         []Metric // the result's scalar values, by name
	CaseID          int64    // the case holding the week, 0 when none does
	Late            bool     // recorded on a case after it was closed
}

// FlaggedWeeks lists a participant's screen-positive weeks under every
// protocol version, with the case holding each.
func (s *Store) FlaggedWeeks(ctx context.Context, participantID int64) ([]FlaggedWeek, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT sr.protocol_id, pr.name, pr.version, sr.week, sr.reason, sr.wear_hours, sr.result,
		       coalesce(cw.case_id, 0), coalesce(cw.late, false)
		FROM screen_results sr
		JOIN protocols pr ON pr.id = sr.protocol_id
		LEFT JOIN case_weeks cw ON cw.participant_id = sr.participant_id AND cw.protocol_id = sr.protocol_id AND cw.week = sr.week
		WHERE sr.participant_id = $1 AND sr.verdict = 'positive'
		ORDER BY sr.week, sr.protocol_id`, participantID)
	if err != nil {
		return nil, mapErr("flagged weeks", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (FlaggedWeek, error) {
		var w FlaggedWeek
		var week int16
		var hours float32
		var raw []byte
		if err := r.Scan(&w.ProtocolID, &w.ProtocolName, &w.ProtocolVersion, &week, &w.Reason, &hours, &raw, &w.CaseID, &w.Late); err != nil {
			return w, err
		}
		w.Week, w.WearHours = int(week), float64(hours)
		w.Metrics = metrics(raw)
		return w, nil
	})
	return out, mapErr("flagged weeks", err)
}

// metrics words a stored result's figures for the flagged-weeks table: for
// each window size the irregular windows among the usable ones, the longest
// run and the windows' MASD against the threshold applied; the beat-interval
// figures when the week had beats; how a personal baseline entered. The
// verdict's own wording is the week's reason, shown beside these.
func metrics(raw []byte) []Metric {
	var res screen.Result
	if json.Unmarshal(raw, &res) != nil || (len(res.Windows) == 0 && res.RR == nil) {
		return scalars(raw)
	}
	var out []Metric
	for _, w := range res.Windows {
		out = append(out, Metric{fmt.Sprintf("%d-minute windows", w.Minutes), fmt.Sprintf(
			"%d of %d usable irregular (%s%%), longest run %d; MASD mean %s, median %s bpm, threshold %s",
			w.Irregular, w.Usable, formatNumber(math.Round(1000*w.Share)/10), w.LongestRun,
			formatNumber(w.MeanMASD), formatNumber(w.MedianMASD), formatNumber(w.Threshold))})
	}
	if r := res.RR; r != nil && r.Beats > 0 {
		out = append(out, Metric{"beat intervals", fmt.Sprintf(
			"%d beats over %s h; %d of %d segments AF-like; mean normalised RMSSD %s, entropy %s, turning point ratio %s",
			r.Beats, formatNumber(r.Hours), r.AFLike, r.Segments, formatNumber(r.MeanNRMSSD), formatNumber(r.MeanEntropy), formatNumber(r.MeanTPR))})
	}
	if b := res.Baseline; b != nil {
		unit := "weeks"
		if b.Weeks == 1 {
			unit = "week"
		}
		out = append(out, Metric{"personal baseline", fmt.Sprintf("%s (%d negative %s)", strings.ReplaceAll(b.Status, "_", " "), b.Weeks, unit)})
	}
	return out
}

// maxScalars bounds the values scalars shows.
const maxScalars = 24

// scalars flattens the scalar values of a result document of another shape
// (one level of nesting, named "outer.inner"), sorted by name, so a result
// the screening code did not write still shows its figures.
func scalars(raw []byte) []Metric {
	var doc map[string]any
	if json.Unmarshal(raw, &doc) != nil {
		return nil
	}
	var out []Metric
	var walk func(prefix string, v any, depth int)
	walk = func(prefix string, v any, depth int) {
		switch x := v.(type) {
		case float64:
			out = append(out, Metric{prefix, formatNumber(x)})
		case string:
			if len(x) <= 80 {
				out = append(out, Metric{prefix, x})
			}
		case bool:
			out = append(out, Metric{prefix, strconv.FormatBool(x)})
		case map[string]any:
			if depth > 0 {
				return
			}
			for k, e := range x {
				walk(prefix+"."+k, e, depth+1)
			}
		}
	}
	for k, v := range doc {
		walk(k, v, 0)
	}
	slices.SortFunc(out, func(a, b Metric) int { return strings.Compare(a.Name, b.Name) })
	if len(out) > maxScalars {
		out = out[:maxScalars]
	}
	return out
}

func formatNumber(x float64) string {
	if x == math.Trunc(x) && math.Abs(x) < 1e15 {
		return strconv.FormatFloat(x, 'f', 0, 64)
	}
	return strconv.FormatFloat(x, 'g', 4, 64)
}

// CaseEventKind says what a timeline entry is about.
type CaseEventKind string

// The kinds of timeline entry.
const (
	EventChange    CaseEventKind = "change"    // an audited change of the case
	EventAttempt   CaseEventKind = "attempt"   // a contact attempt
	EventRecording CaseEventKind = "recording" // an ECG recording of the case
	EventOverRead  CaseEventKind = "over_read" // a clinician's over-read
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
}

// CaseEvent is one entry of a case's timeline.
type CaseEvent struct {
	At        time.Time
	Kind      CaseEventKind
	Actor     string
	Action    string        // audit action of a change
	Changes   []FieldChange // what a change did
	Attempt   *Attempt
	Recording *RecordingRef
	OverRead  *OverReadRef
}

// CaseTimeline lists everything that happened to a case, newest first: the
// audited changes (an attempt's own entry stands in for its audit event), the
// contact attempts, the recordings and the over-reads.
func (s *Store) CaseTimeline(ctx context.Context, c Case, loc *time.Location) ([]CaseEvent, error) {
	var out []CaseEvent
	err := pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly}, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `
			SELECT at, actor, action, old_value, new_value FROM audit_events
			WHERE object_type = 'case' AND object_id = $1 AND action <> 'case.attempt'
			ORDER BY id`, strconv.FormatInt(c.ID, 10))
		if err != nil {
			return err
		}
		for rows.Next() {
			e := CaseEvent{Kind: EventChange}
			var oldRaw, newRaw []byte
			if err := rows.Scan(&e.At, &e.Actor, &e.Action, &oldRaw, &newRaw); err != nil {
				rows.Close()
				return err
			}
			e.Changes = snapshotChanges(oldRaw, newRaw, loc)
			out = append(out, e)
		}
		if err := rows.Err(); err != nil {
			return err
		}
		attempts, err := caseAttempts(ctx, tx, c.ID)
		if err != nil {
			return err
		}
		for i := range attempts {
			out = append(out, CaseEvent{At: attempts[i].At, Kind: EventAttempt, Actor: attempts[i].Actor, Attempt: &attempts[i]})
		}
		rrows, err := tx.Query(ctx, `
			SELECT r.id, r.taken_at, r.duration_s, r.auto_interpretation, r.too_short, r.created_by,
			       EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id)
			FROM recordings r WHERE r.case_id = $1`, c.ID)
		if err != nil {
			return err
		}
		for rrows.Next() {
			var r RecordingRef
			var dur float32
			var by string
			if err := rrows.Scan(&r.ID, &r.TakenAt, &dur, &r.AutoInterpretation, &r.TooShort, &by, &r.OverRead); err != nil {
				rrows.Close()
				return err
			}
			r.DurationS = float64(dur)
			out = append(out, CaseEvent{At: r.TakenAt, Kind: EventRecording, Actor: by, Recording: &r})
		}
		if err := rrows.Err(); err != nil {
			return err
		}
		orows, err := tx.Query(ctx, `SELECT id, recording_id, role, rhythm, confidence, reader, read_on, created_at FROM over_reads WHERE case_id = $1`, c.ID)
		if err != nil {
			return err
		}
		for orows.Next() {
			var o OverReadRef
			var on, at time.Time
			if err := orows.Scan(&o.ID, &o.RecordingID, &o.Role, &o.Rhythm, &o.Confidence, &o.Reader, &on, &at); err != nil {
				orows.Close()
				return err
			}
			o.ReadOn = cohort.DateOf(on)
			out = append(out, CaseEvent{At: at, Kind: EventOverRead, Actor: o.Reader, OverRead: &o})
		}
		return orows.Err()
	})
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
		return t.In(loc).Format("2006-01-02")
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
		return followup.NewCalendar(loc).DueDay(*t).String()
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
	add("closing reason", o.ClosingNote, n.ClosingNote)
	add("working note", o.Note, n.Note)
	if len(n.WeeksAdded) > 0 {
		ws := make([]string, len(n.WeeksAdded))
		for i, w := range n.WeeksAdded {
			ws[i] = strconv.Itoa(w)
		}
		out = append(out, FieldChange{"positive weeks added", "", strings.Join(ws, ", ")})
	}
	if n.Reason != "" && n.Reason != n.ClosingNote {
		out = append(out, FieldChange{"reason", "", n.Reason})
	}
	return out
}

package db

import (
	"context"
	"fmt"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// CaseScope is which cases the list holds when it is not narrowed to one
// state.
type CaseScope int

// The scopes of the case list.
const (
	WorkingCases CaseScope = iota // still being worked (the default)
	EndedCases                    // ended in a final state
	AllCases
)

// CaseFilter narrows the case list.
type CaseFilter struct {
	Scope   CaseScope
	State   followup.State // one state only; "" for every state of the scope
	OwnerID int64          // > 0: that person's cases
	Unowned bool           // cases nobody has taken on
	Overdue bool           // deadline passed
	SiteID  int
	Search  string // any part of the participant's study ID (studyIDSearch)
	Sort    string // "due" (the default), "flagged" or "study_id"
	Desc    bool   // the order reversed
	After   string // opaque keyset cursor from the previous page
	Limit   int
}

// CasePage is one page of the case list, in the filter's order (by default
// by deadline, cases with nothing due last), then id.
type CasePage struct {
	Rows  []Case
	Next  string // cursor of the next page, "" at the end
	Total int64  // cases matching the filter
	// AtLeast: Total is a lower bound; the filter's cases were counted up
	// to countCap and there are more.
	AtLeast bool
}

// countCap bounds a count that no kept sum answers: a list says "at least"
// beyond it rather than count every row of a large study on each page.
const countCap = 10000

// caseCount counts the cases the filter matches: from the sums kept by state,
// owner and deadline hour (case_counts) when the filter is made of those,
// else up to countCap from the cases themselves.
func (s *Store) caseCount(ctx context.Context, f CaseFilter, where string, args []any) (int64, bool, error) {
	var n int64
	if f.OwnerID > 0 || f.SiteID > 0 || strings.TrimSpace(f.Search) != "" {
		err := s.reader(ctx).QueryRow(ctx, `SELECT count(*) FROM (SELECT 1 FROM cases c JOIN participants p ON p.id = c.participant_id WHERE `+
			where+fmt.Sprintf(` LIMIT %d) x`, countCap+1), args...).Scan(&n)
		return min(n, countCap), n > countCap, err
	}
	var states []string
	for _, st := range followup.States() {
		switch {
		case f.State != "":
			if st != f.State {
				continue
			}
		case f.Scope == WorkingCases && st.Terminal(), f.Scope == EndedCases && !st.Terminal():
			continue
		}
		states = append(states, string(st))
	}
	now := s.now()
	err := s.reader(ctx).QueryRow(ctx, `
		SELECT (SELECT coalesce(sum(n), 0) FROM case_counts
		        WHERE state = ANY($1) AND NOT ($2 AND owned) AND (NOT $3 OR due_hour + interval '1 hour' <= $4::timestamptz AT TIME ZONE 'UTC'))
		     + (SELECT count(*) FROM cases c WHERE $3 AND c.closed_at IS NULL AND c.state = ANY($1) AND NOT ($2 AND c.owner_id IS NOT NULL)
		        AND c.due_at >= date_trunc('hour', $4::timestamptz AT TIME ZONE 'UTC') AT TIME ZONE 'UTC' AND c.due_at <= $4::timestamptz)`,
		states, f.Unowned, f.Overdue, now).Scan(&n)
	return n, false, err
}

// caseOrders are the orders the case list can be sorted in, by the key its
// column headers use: each a sort expression, with c.id after it the order
// is total. The due and flag orders follow an index; the study ID order
// sorts the matching cases, which are few per study.
var caseOrders = map[string]string{
	"due":      `coalesce(c.due_at, 'infinity'::timestamptz)`,
	"flagged":  `c.flagged_at`,
	"study_id": `p.study_id`,
}

func (f CaseFilter) where(now time.Time) (string, []any, error) {
	conds := []string{"true"}
	var args []any
	arg := func(v any) string { args = append(args, v); return "$" + strconv.Itoa(len(args)) }
	switch {
	case f.State != "":
		conds = append(conds, "c.state = "+arg(string(f.State)))
	case f.Scope == WorkingCases:
		conds = append(conds, "c.closed_at IS NULL")
	case f.Scope == EndedCases:
		conds = append(conds, "c.closed_at IS NOT NULL")
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
	if q := strings.TrimSpace(f.Search); q != "" {
		conds = append(conds, studyIDSearch(q, arg))
	}
	return strings.Join(conds, " AND "), args, nil
}

// Check refuses a filter the list cannot apply: an unknown state or a
// cursor this list did not make (a tampered or outdated page link).
// Messages are keyed by the list's query parameters.
func (f CaseFilter) Check() error {
	var ve cohort.ValidationError
	if f.State != "" && !f.State.Valid() {
		ve.Add("state", "choose a state from the list")
	}
	if f.After != "" {
		if c, ok := decodeCursor(f.After); !ok || c.ID <= 0 || c.Key != "" {
			ve.Add("after", errBadCursor.Fields["after"])
		}
	}
	return ve.Err()
}

// Cases returns one page of the filtered case list with keyset pagination.
func (s *Store) Cases(ctx context.Context, f CaseFilter) (CasePage, error) {
	if f.Limit <= 0 || f.Limit > 500 {
		f.Limit = 50
	}
	if err := f.Check(); err != nil {
		return CasePage{}, err
	}
	var page CasePage
	where, args, err := f.where(s.now())
	if err != nil {
		return page, err
	}
	if page.Total, page.AtLeast, err = s.caseCount(ctx, f, where, args); err != nil {
		return page, mapErr("cases count", err)
	}
	order, ok := caseOrders[f.Sort]
	if !ok {
		order = caseOrders["due"]
	}
	cmp, dir := ">", ""
	if f.Desc {
		cmp, dir = "<", " DESC"
	}
	if c, ok := decodeCursor(f.After); ok {
		// The cursor is the last row's id alone: a deadline or a flag time
		// in the page link would show monitors a date of a participant's
		// case. The row's sort key is read back from it.
		args = append(args, c.ID)
		where += fmt.Sprintf(" AND (%s, c.id) %s (SELECT %s, c.id FROM cases c JOIN participants p ON p.id = c.participant_id WHERE c.id = $%d)",
			order, cmp, order, len(args))
	}
	args = append(args, f.Limit+1)
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE `+where+
		fmt.Sprintf(` ORDER BY %s%s, c.id%s LIMIT $%d`, order, dir, dir, len(args)), args...)
	if err != nil {
		return page, mapErr("cases", err)
	}
	page.Rows, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (Case, error) { return scanCase(r) })
	if err != nil {
		return page, mapErr("cases", err)
	}
	if len(page.Rows) > f.Limit {
		page.Rows = page.Rows[:f.Limit]
		page.Next = encodeCursor(cursor{ID: page.Rows[f.Limit-1].ID})
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

// Triage places the cases still being worked in followup.Urgency's groups
// at the store's now, in the study's time zone, for the person with account
// id me (their own cases have a group), counts every group, and returns the
// first perGroup cases of each urgent group in full, in the group's order
// (all of them when perGroup <= 0). Cases on schedule (followup.BucketOther)
// are counted, not returned: the triage page does not list them, the case
// list does.
//
// The counts come from sums kept by state, owner and the hour of the
// deadline (case_counts), with the hour that holds each of
// followup.Deadlines counted exactly from the deadline index; the cases
// holding a recording waiting for an over-read are kept by case
// (figure_waiting); the person's own cases come from the owner index. Each
// group's first rows come in the group's order from those. So the page costs
// what it shows and what waits, however many cases are being worked.
func (s *Store) Triage(ctx context.Context, perGroup int, me int64) (Triage, error) {
	var t Triage
	var err error
	if t.Settings, err = s.StudySettings(ctx); err != nil {
		return t, mapErr("triage", err)
	}
	t.Now = s.now().In(t.Settings.Location())
	overdue, today := followup.Deadlines(t.Now)
	var working []string
	for _, st := range followup.States() {
		if !st.Terminal() {
			working = append(working, string(st))
		}
	}
	limit := any(nil)
	if perGroup > 0 {
		limit = perGroup
	}
	hour := func(at time.Time) string { return at.UTC().Truncate(time.Hour).Format("2006-01-02 15:04:05") }
	open := string(followup.Open)
	// A case past the first three groups: nothing due by the end of today,
	// and not a new flag nobody has taken on.
	const later = `c.closed_at IS NULL AND (c.due_at IS NULL OR c.due_at > $1) AND NOT (c.state = 'open' AND c.owner_id IS NULL)`
	const waits = `EXISTS (SELECT 1 FROM figure_waiting w WHERE w.participant_id = c.participant_id AND w.case_id = c.id)`
	b := &pgx.Batch{}
	// Cases with a deadline at or before a moment: the whole hours before
	// it from the sums, the hour that holds it from the cases themselves.
	b.Queue(`
		WITH k AS (SELECT state, owned, due_hour, sum(n) AS n FROM case_counts WHERE state = ANY($1) GROUP BY 1, 2, 3 HAVING sum(n) <> 0),
		x AS (SELECT c.state, c.owner_id IS NOT NULL AS owned, c.due_at FROM cases c
		      WHERE c.closed_at IS NULL AND ((c.due_at >= $2::timestamp AT TIME ZONE 'UTC' AND c.due_at <= $3::timestamptz)
		                                  OR (c.due_at >= $4::timestamp AT TIME ZONE 'UTC' AND c.due_at <= $5::timestamptz))),
		upto AS (
		  SELECT (SELECT coalesce(sum(n), 0) FROM k WHERE due_hour + interval '1 hour' <= $3::timestamptz AT TIME ZONE 'UTC')
		         + (SELECT count(*) FROM x WHERE due_at >= $2::timestamp AT TIME ZONE 'UTC' AND due_at <= $3::timestamptz) AS overdue,
		         (SELECT coalesce(sum(n), 0) FROM k WHERE due_hour + interval '1 hour' <= $5::timestamptz AT TIME ZONE 'UTC')
		         + (SELECT count(*) FROM x WHERE due_at >= $4::timestamp AT TIME ZONE 'UTC' AND due_at <= $5::timestamptz) AS today,
		         (SELECT coalesce(sum(n), 0) FROM k WHERE state = $6 AND NOT owned AND due_hour + interval '1 hour' <= $5::timestamptz AT TIME ZONE 'UTC')
		         + (SELECT count(*) FROM x WHERE state = $6 AND NOT owned AND due_at >= $4::timestamp AT TIME ZONE 'UTC' AND due_at <= $5::timestamptz) AS new_due)
		SELECT (SELECT coalesce(sum(n), 0) FROM k), upto.overdue, upto.today,
		       (SELECT coalesce(sum(n), 0) FROM k WHERE state = $6 AND NOT owned) - upto.new_due,
		       (SELECT coalesce(sum(n), 0) FROM figure_unread_counts)
		FROM upto`, working, hour(overdue), overdue, hour(today), today, open)
	b.Queue(`SELECT count(*) FROM figure_waiting w JOIN cases c ON c.participant_id = w.participant_id AND c.id = w.case_id WHERE `+later, today)
	b.Queue(`SELECT count(*) FROM cases c WHERE c.owner_id = $2 AND `+later+` AND NOT `+waits, today, me)
	// Each group's first rows, in followup.Urgency's order (ties by study
	// ID, then case id as text), each from an index in that order
	// (migration 0042: cases carry their participant's study ID) or from
	// the few cases waiting for an over-read.
	const tie = `c.study_id COLLATE "C", (c.id::text) COLLATE "C"`
	full := `SELECT ` + caseCols + ` FROM ` + caseFrom
	b.Queue(full+` WHERE c.closed_at IS NULL AND c.due_at <= $1 ORDER BY c.due_at, `+tie+` LIMIT $2`, overdue, limit)
	b.Queue(full+` WHERE c.closed_at IS NULL AND c.due_at > $1 AND c.due_at <= $2 ORDER BY c.due_at, `+tie+` LIMIT $3`, overdue, today, limit)
	b.Queue(full+` WHERE c.state = $2 AND c.owner_id IS NULL AND (c.due_at IS NULL OR c.due_at > $1)
		ORDER BY c.flagged_at, `+tie+` LIMIT $3`, today, open, limit)
	// A recording that came in without its return being recorded dates the
	// wait by its own arrival (triageItem).
	b.Queue(full+` JOIN figure_waiting w ON w.participant_id = c.participant_id AND w.case_id = c.id WHERE `+later+`
		ORDER BY coalesce(c.recording_back_at, rec.oldest), `+tie+` LIMIT $2`, today, limit)
	b.Queue(full+` WHERE c.owner_id = $2 AND `+later+` AND NOT `+waits+` ORDER BY c.due_at, `+tie+` LIMIT $3`, today, me, limit)
	var groups [5][]Case
	var all, n1, n2, n3, n4, n5, unread int
	err = s.readBatch(ctx, b, func(br pgx.BatchResults) error {
		if err := br.QueryRow().Scan(&all, &n1, &n2, &n3, &unread); err != nil {
			return err
		}
		if err := br.QueryRow().Scan(&n4); err != nil {
			return err
		}
		if err := br.QueryRow().Scan(&n5); err != nil {
			return err
		}
		for i := range groups {
			rows, err := br.Query()
			if err != nil {
				return err
			}
			if groups[i], err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (Case, error) { return scanCase(r) }); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return t, mapErr("triage", err)
	}
	if me == 0 {
		n5, groups[4] = 0, nil
	}
	t.Counts = map[followup.Bucket]int{followup.BucketOverdue: n1, followup.BucketDueToday: n2 - n1,
		followup.BucketNewUnowned: n3, followup.BucketAwaitingOverRead: n4, followup.BucketMine: n5}
	t.Counts[followup.BucketOther] = all - n2 - n3 - n4 - n5
	for b, n := range t.Counts {
		if n == 0 {
			delete(t.Counts, b)
		}
	}
	t.UnreadRecordings = unread
	buckets := []followup.Bucket{followup.BucketOverdue, followup.BucketDueToday, followup.BucketNewUnowned, followup.BucketAwaitingOverRead, followup.BucketMine}
	for i, g := range groups {
		for _, c := range g {
			t.Rows = append(t.Rows, TriageRow{Case: c, Bucket: buckets[i]})
		}
	}
	return t, nil
}

// TriageCase places one case (final or not) in the triage order of the
// person with account id me, for updating its row on the page after an
// action.
func (s *Store) TriageCase(ctx context.Context, id, me int64) (Triage, error) {
	c, err := s.Case(ctx, id)
	if err != nil {
		return Triage{}, err
	}
	st, err := s.StudySettings(ctx)
	if err != nil {
		return Triage{}, err
	}
	t := Triage{Settings: st, Now: s.now().In(st.Location()), UnreadRecordings: c.UnreadRecordings}
	b := followup.Urgency(triageItem(c, me), t.Now).Bucket
	t.Rows = []TriageRow{{Case: c, Bucket: b}}
	t.Counts = map[followup.Bucket]int{b: 1}
	return t, nil
}

// triageItem is the case as the triage order sees it. A recording that came
// in without its return being recorded still dates the wait for an over-read.
func triageItem(c Case, me int64) followup.TriageItem {
	received := c.RecordingBackAt
	if received.IsZero() {
		received = c.OldestUnread
	}
	return followup.TriageItem{CaseID: strconv.FormatInt(c.ID, 10), StudyID: c.StudyID, State: c.State, Owner: c.Owner,
		FlaggedAt: c.FlaggedAt, RecordingReceivedAt: received, Due: c.DueAt, AwaitingReads: c.UnreadRecordings,
		Mine: me != 0 && c.OwnerID == me}
}

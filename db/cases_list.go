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
	"github.com/jackc/pgx/v5/pgtype"
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
	if err := s.pool.QueryRow(ctx, `SELECT count(*) FROM cases c JOIN participants p ON p.id = c.participant_id WHERE `+where, args...).Scan(&page.Total); err != nil {
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
	rows, err := s.pool.Query(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE `+where+
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

// Triage orders the cases still being worked by followup.Urgency at the
// store's now, in the study's time zone, for the person with account id me
// (their own cases have a group), counts every group, and returns the first
// perGroup cases of each urgent group in full (all of them when perGroup <=
// 0). Cases on schedule (followup.BucketOther) are counted, not returned:
// the triage page does not list them, the case list does.
//
// The order needs only a few fields of every case, so those are read for all
// cases and the full rows only for the cases returned: at 2,000 working cases
// this halves the time of the page. The reads need no common snapshot (a case
// changed in between shows as it now is), so they run outside a transaction.
func (s *Store) Triage(ctx context.Context, perGroup int, me int64) (Triage, error) {
	var t Triage
	var items []followup.TriageItem
	err := func() error {
		var err error
		if t.Settings, err = studySettings(ctx, s.pool); err != nil {
			return err
		}
		rows, err := s.pool.Query(ctx, `
			SELECT c.id, p.study_id, c.state, coalesce(u.display_name, ''), coalesce(c.owner_id, 0), c.flagged_at, c.due_at,
			       coalesce(c.recording_back_at, rec.oldest), coalesce(rec.n, 0)
			FROM `+caseFrom+` WHERE c.closed_at IS NULL`)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var id, owner int64
			var it followup.TriageItem
			var state string
			var due, received pgtype.Timestamptz
			var n int
			if err := rows.Scan(&id, &it.StudyID, &state, &it.Owner, &owner, &it.FlaggedAt, &due, &received, &n); err != nil {
				return err
			}
			it.CaseID, it.State, it.Due, it.RecordingReceivedAt = strconv.FormatInt(id, 10), followup.State(state), due.Time, received.Time
			it.AwaitingReads, it.Mine = n, me != 0 && owner == me
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

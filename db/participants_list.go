package db

import (
	"context"
	"encoding/base64"
	"encoding/json"
	"fmt"
	"strconv"
	"strings"
	"time"
	"unicode"

	"cohortdesk/cohort"

	"github.com/jackc/pgx/v5"
)

// The participant list: filters, orders and keyset pages.

// ParticipantFilter narrows and orders the participant list.
type ParticipantFilter struct {
	Search        string // any part of a study ID (studyIDSearch); names too when WithNames
	SiteID        int
	Status        cohort.ParticipantStatus // "" for every status
	PositiveWeeks int                      // screen-positive within the last N study weeks (0: no filter)
	OpenCase      bool
	Sort          string // "study_id" (default), "enrolled", "site"
	Desc          bool
	After         string // opaque keyset cursor from the previous page
	Limit         int
	WithNames     bool // include PHI names: only for roles that see PHI
}

// ParticipantRow is one line of the list.
type ParticipantRow struct {
	Participant
	Name         string // PHI, empty unless asked for
	LastPositive *int   // latest screen-positive study week
	OpenCases    int
}

// ParticipantPage is one page of the list with the counts of the whole filter.
type ParticipantPage struct {
	Rows    []ParticipantRow
	Next    string // cursor for the next page, "" at the end
	Total   int64  // rows matching the filter
	AtLeast bool   // the counts stopped at countCap: there are more
	// Status counts the rows matching the filter by cohort.StatusOf today.
	Status map[cohort.ParticipantStatus]int64
}

// listOrder is one order of the participants list: the ORDER BY
// expressions (together unique, so the order is total), the cursor's key as
// text, read from the last row of a page ("" for an order whose cursor is
// the row's id alone), and the rows after a cursor as a comparison in which
// %[1]s is the key's placeholder, %[2]s the id's and %[3]s the operator (>
// ascending, < descending). The study ID and enrolment orders follow an
// index, so any page costs about the same as the first; the site order
// sorts the filtered rows (sites are in another table). The enrolment
// order's cursor holds no date: the page links of a role that sees no
// dates must not carry one (cohort.Role.SeesDatesAndFreeText), so the
// comparison reads the cursor row's day from the table.
type listOrder struct {
	by    []string
	key   string
	after string
}

var listOrders = map[string]listOrder{
	"study_id": {by: []string{"p.study_id"}, key: "p.study_id", after: "p.study_id %[3]s %[1]s"},
	"enrolled": {by: []string{"p.enrolled_on", "p.study_id"},
		after: "(p.enrolled_on, p.study_id) %[3]s (SELECT k.enrolled_on, k.study_id FROM participants k WHERE k.id = %[2]s)"},
	"site": {by: []string{"st.code || ' ' || p.study_id", "p.id"}, key: "st.code || ' ' || p.study_id",
		after: "(st.code || ' ' || p.study_id, p.id) %[3]s (%[1]s, %[2]s)"},
}

// ParticipantsWhere builds the filter's WHERE clause; it is shared by the page,
// the counts and the CSV download so the three always agree.
func (f ParticipantFilter) where(today time.Time, statusDay cohort.Date, weeks int) (string, []any) {
	conds := []string{"true"}
	var args []any
	arg := func(v any) string { args = append(args, v); return "$" + strconv.Itoa(len(args)) }
	if q := strings.TrimSpace(f.Search); q != "" {
		// Both conditions can use a trigram index: on the study ID's letters
		// and digits (studyIDSearch), on names (the set of matching names is
		// read once, not per participant).
		cond := studyIDSearch(q, arg)
		if f.WithNames {
			cond = "(" + cond + " OR p.id IN (SELECT pi.participant_id FROM participant_identity pi WHERE pi.search_name LIKE " +
				arg("%"+escapeLike(strings.ToLower(q))+"%") + "))"
		}
		conds = append(conds, cond)
	}
	if f.SiteID > 0 {
		conds = append(conds, "p.site_id = "+arg(f.SiteID))
	}
	if f.Status != "" {
		conds = append(conds, participantStatus(arg(statusDay.String()), arg(weeks))+" = "+arg(string(f.Status)))
	}
	if f.PositiveWeeks > 0 {
		// The active version as a value, so the positive results come from
		// their own partial index.
		conds = append(conds, `EXISTS (SELECT 1 FROM screen_results sr
			WHERE sr.protocol_id = (SELECT id FROM protocols WHERE active) AND sr.participant_id = p.id AND sr.verdict = 'positive'
			  AND sr.week >= ((`+arg(today)+`::date - p.enrolled_on) / 7) - `+arg(f.PositiveWeeks)+`)`)
	}
	if f.OpenCase {
		conds = append(conds, `EXISTS (SELECT 1 FROM cases c WHERE c.participant_id = p.id AND c.closed_at IS NULL)`)
	}
	return strings.Join(conds, " AND "), args
}

// participantCounts counts the filter's participants by status: from the
// enrolment sums (enrolment_counts, whose columns the filter's WHERE then
// reads) when the filter is a site and a status, else up to countCap from the
// participants themselves.
func (s *Store) participantCounts(ctx context.Context, f ParticipantFilter, where string, args []any, day cohort.Date, weeks int, page *ParticipantPage) error {
	var err error
	if strings.TrimSpace(f.Search) == "" && f.PositiveWeeks == 0 && !f.OpenCase {
		page.Status, page.Total, err = keptByStatus(ctx, s.reader(ctx), where, args, day, weeks)
		return err
	}
	capped := fmt.Sprintf(`(SELECT p.withdrawn_on, p.enrolled_on FROM participants p WHERE %s LIMIT %d) p`, where, countCap+1)
	page.Status, page.Total, err = countByStatus(ctx, s.reader(ctx), capped, "count(*)", "true", args, day, weeks)
	if page.Total > countCap {
		page.AtLeast, page.Total = true, countCap
	}
	return err
}

// studyIDKey is the form a study ID is searched in: its letters and digits,
// lower case, so "0173", "qrw0173" and "QRW-0173" all find QRW-0173-K. The
// column participants.search_id holds it, with a trigram index (migration
// 0091).
const studyIDKey = `p.search_id`

// studyIDSearch is the condition that q appears anywhere in the study ID of
// p, compared in studyIDKey's form: q in lower case without the separators
// people type (hyphens, spaces, dots, slashes). Any other character is
// looked for literally, so a LIKE wildcard typed in the box is no wildcard
// (and, as no key holds it, finds nothing). A q of separators only is looked
// for as typed.
func studyIDSearch(q string, arg func(any) string) string {
	key := strings.Map(func(r rune) rune {
		switch r {
		case '-', ' ', '.', '/', '\t':
			return -1
		}
		return unicode.ToLower(r)
	}, q)
	if key == "" {
		return "lower(p.study_id) LIKE " + arg("%"+escapeLike(strings.ToLower(q))+"%")
	}
	return studyIDKey + " LIKE " + arg("%"+escapeLike(key)+"%")
}

func escapeLike(s string) string {
	return strings.NewReplacer(`\`, `\\`, "%", `\%`, "_", `\_`).Replace(s)
}

type cursor struct {
	Key string `json:"k,omitempty"`
	ID  int64  `json:"i"`
}

func encodeCursor(c cursor) string {
	b, _ := json.Marshal(c)
	return base64.RawURLEncoding.EncodeToString(b)
}

func decodeCursor(s string) (cursor, bool) {
	var c cursor
	b, err := base64.RawURLEncoding.DecodeString(s)
	if err != nil || json.Unmarshal(b, &c) != nil || strings.ContainsRune(c.Key, 0) {
		return c, false
	}
	return c, true
}

// errBadCursor refuses a page link whose cursor is not one this list made.
var errBadCursor = &cohort.ValidationError{Fields: map[string]string{"after": "this page link is broken or out of date: go back to the first page"}}

// Check refuses a filter the list cannot apply: an unknown status or order,
// a negative number of weeks, a cursor this list did not make (a tampered or
// outdated page link). Messages are keyed by the list's query parameters.
func (f ParticipantFilter) Check() error {
	var ve cohort.ValidationError
	if f.Status != "" && !f.Status.Valid() {
		ve.Add("status", "choose active, completed, withdrawn or all")
	}
	order, ok := listOrders[f.Sort]
	if f.Sort != "" && !ok {
		ve.Add("sort", "choose study ID, enrolment date or site")
	}
	if f.PositiveWeeks < 0 || f.PositiveWeeks > MaxPositiveWeeks {
		ve.Add("positive", fmt.Sprintf("a number of weeks from 1 to %d", MaxPositiveWeeks))
	}
	if f.After != "" {
		if !ok {
			order = listOrders["study_id"]
		}
		if c, good := decodeCursor(f.After); !good || !order.cursorOK(c) {
			ve.Add("after", errBadCursor.Fields["after"])
		}
	}
	return ve.Err()
}

// cursorOK reports whether c is a cursor this order makes: a record id,
// and a key exactly when the order has one.
func (o listOrder) cursorOK(c cursor) bool {
	return c.ID > 0 && (o.key == "") == (c.Key == "")
}

// MaxPositiveWeeks bounds the "screen-positive in the last N weeks" filter:
// the longest follow-up a study may set (study.follow_up_weeks).
const MaxPositiveWeeks = 520

// Participants returns one page of the filtered list, ordered by the chosen key
// and then id, using keyset pagination so a page deep in a 100,000-row list
// costs the same as the first.
func (s *Store) Participants(ctx context.Context, f ParticipantFilter) (ParticipantPage, error) {
	if f.Limit <= 0 || f.Limit > 500 {
		f.Limit = 50
	}
	if err := f.Check(); err != nil {
		return ParticipantPage{}, err
	}
	order, ok := listOrders[f.Sort]
	if !ok {
		order = listOrders["study_id"]
	}
	today := s.now().UTC()
	day, weeks, err := s.statusDay(ctx)
	if err != nil {
		return ParticipantPage{}, mapErr("participants", err)
	}
	where, args := f.where(today, day, weeks)
	var page ParticipantPage
	if err := s.participantCounts(ctx, f, where, args, day, weeks, &page); err != nil {
		return page, mapErr("participants count", err)
	}
	cmp, dir := ">", " ASC"
	if f.Desc {
		cmp, dir = "<", " DESC"
	}
	if c, ok := decodeCursor(f.After); ok {
		keyArg, idArg := "", ""
		if strings.Contains(order.after, "%[1]s") {
			args = append(args, c.Key)
			keyArg = fmt.Sprintf("$%d::text", len(args))
		}
		if strings.Contains(order.after, "%[2]s") {
			args = append(args, c.ID)
			idArg = fmt.Sprintf("$%d::bigint", len(args))
		}
		where += " AND " + fmt.Sprintf(order.after, keyArg, idArg, cmp)
	}
	key := order.key
	if key == "" {
		key = "''::text"
	}
	nameCol := "''::text"
	if f.WithNames {
		nameCol = "coalesce((SELECT pi.given_name || ' ' || pi.family_name FROM participant_identity pi WHERE pi.participant_id = p.id), '')"
	}
	args = append(args, f.Limit+1)
	rows, err := s.reader(ctx).Query(ctx, `
		SELECT `+participantCols+`, `+key+`, `+nameCol+`,
		  (SELECT max(sr.week) FROM screen_results sr JOIN protocols pr ON pr.id = sr.protocol_id AND pr.active
		   WHERE sr.participant_id = p.id AND sr.verdict = 'positive'),
		  (SELECT count(*) FROM cases c WHERE c.participant_id = p.id AND c.closed_at IS NULL)
		FROM participants p JOIN sites st ON st.id = p.site_id
		WHERE `+where+` ORDER BY `+strings.Join(order.by, dir+", ")+dir+fmt.Sprintf(` LIMIT $%d`, len(args)), args...)
	if err != nil {
		return page, mapErr("participants", err)
	}
	defer rows.Close()
	var keys []string
	for rows.Next() {
		var r ParticipantRow
		var k string
		var last *int16
		p, err := scanParticipant(rows, &k, &r.Name, &last, &r.OpenCases)
		if err != nil {
			return page, mapErr("participants", err)
		}
		r.Participant = p
		r.Name = strings.TrimSpace(r.Name)
		if last != nil {
			w := int(*last)
			r.LastPositive = &w
		}
		page.Rows = append(page.Rows, r)
		keys = append(keys, k)
	}
	if err := rows.Err(); err != nil {
		return page, mapErr("participants", err)
	}
	if len(page.Rows) > f.Limit {
		page.Rows = page.Rows[:f.Limit]
		last := page.Rows[f.Limit-1]
		page.Next = encodeCursor(cursor{Key: keys[f.Limit-1], ID: last.ID}) // Key "" for an order without one
	}
	return page, nil
}

// FirstEnrolment is the study's first enrolment day, from which recruitment
// weeks count (the zero date before anyone is enrolled).
func (s *Store) FirstEnrolment(ctx context.Context) (cohort.Date, error) {
	var first *time.Time
	if err := s.reader(ctx).QueryRow(ctx, `SELECT min(enrolled_on) FROM participants`).Scan(&first); err != nil {
		return cohort.Date{}, mapErr("first enrolment", err)
	}
	if first == nil {
		return cohort.Date{}, nil
	}
	return cohort.DateOf(*first), nil
}

// ParticipantIDs lists the ids of every participant the filter matches, in
// id order, whatever f's order, cursor and limit: what a download of the
// filtered list is about to contain, for its audit event.
func (s *Store) ParticipantIDs(ctx context.Context, f ParticipantFilter) ([]int64, error) {
	if err := f.Check(); err != nil {
		return nil, err
	}
	day, weeks, err := s.statusDay(ctx)
	if err != nil {
		return nil, mapErr("participant ids", err)
	}
	where, args := f.where(s.now().UTC(), day, weeks)
	rows, err := s.pool.Query(ctx, `SELECT p.id FROM participants p WHERE `+where+` ORDER BY p.id`, args...)
	if err != nil {
		return nil, mapErr("participant ids", err)
	}
	ids, err := pgx.CollectRows(rows, pgx.RowTo[int64])
	return ids, mapErr("participant ids", err)
}

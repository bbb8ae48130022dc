package followup

import (
	"cmp"
	"slices"
	"time"
)

// OrderRule explains the triage order on the page, in the words of the rule
// Urgency implements; change both together.
const OrderRule = "How this list is ordered: overdue cases first, the most overdue at the top; " +
	"then cases due today, earliest deadline first; then new flags that nobody has taken on yet, " +
	"oldest flag first; then cases with a recording waiting for an over-read, oldest recording first; " +
	"then your own other cases, coming due, earliest deadline first; " +
	"then all other cases by due date, cases with nothing due last. " +
	"Cases that tie are listed by study ID."

// TriageItem is one row of the triage list as the ordering needs it.
type TriageItem struct {
	CaseID              string
	StudyID             string
	State               State
	Owner               string    // user who took the case on; empty when nobody has
	FlaggedAt           time.Time // when the episode was flagged
	RecordingReceivedAt time.Time // when the recording arrived; zero when none
	Due                 time.Time // next action's deadline from NextDue; zero when nothing is due
	// AwaitingReads counts the case's recordings waiting for an over-read
	// (overread.Awaits).
	AwaitingReads int
	// Mine marks a case the person the list is for has taken on.
	Mine bool
}

// Bucket is the group a triage item falls in; lower buckets come first.
type Bucket int

// The triage groups, most urgent first.
const (
	BucketOverdue          Bucket = 1
	BucketDueToday         Bucket = 2
	BucketNewUnowned       Bucket = 3
	BucketAwaitingOverRead Bucket = 4
	BucketMine             Bucket = 5
	BucketOther            Bucket = 6
)

// Label names the group for a heading or a badge.
func (b Bucket) Label() string {
	switch b {
	case BucketOverdue:
		return "overdue"
	case BucketDueToday:
		return "due today"
	case BucketNewUnowned:
		return "new, not taken on"
	case BucketAwaitingOverRead:
		return "waiting for an over-read"
	case BucketMine:
		return "yours, coming due"
	case BucketOther:
		return "scheduled"
	}
	return "unknown"
}

// Key is an item's place in the triage order; compare keys with Compare.
type Key struct {
	Bucket  Bucket
	At      time.Time // the time that orders the item inside its bucket
	Undated bool      // no time to order by; such items go after dated ones in their bucket
	StudyID string
	CaseID  string // last tie-break, so the order is total and stable across reloads
}

// Compare orders keys: by bucket, then At (earliest first, undated last), then
// study ID, then case ID.
func (k Key) Compare(o Key) int {
	if c := cmp.Compare(k.Bucket, o.Bucket); c != 0 {
		return c
	}
	if k.Undated != o.Undated {
		if k.Undated {
			return 1
		}
		return -1
	}
	if c := k.At.Compare(o.At); c != 0 {
		return c
	}
	if c := cmp.Compare(k.StudyID, o.StudyID); c != 0 {
		return c
	}
	return cmp.Compare(k.CaseID, o.CaseID)
}

// Urgency places an item in the triage order at the moment now (see
// OrderRule). Pass now in the study's time zone (now.In(cal.Location)):
// "today" is the calendar day of now in now's location.
//
// Overdue means a deadline at or before now; the earliest deadline is the most
// overdue. Due today means a deadline after now but no later than the next
// local midnight, which includes deadlines from AddWorkingDays falling due at
// the end of today. New flags are open cases without an owner; cases waiting
// for an over-read hold a recording waiting for one. The person's own cases
// with nothing urgent come next, so a case they took on stays in sight. The
// first group that fits wins, so an overdue new flag is listed as overdue.
func Urgency(item TriageItem, now time.Time) Key {
	k := Key{StudyID: item.StudyID, CaseID: item.CaseID}
	overdue, tomorrow := Deadlines(now)
	switch {
	case !item.Due.IsZero() && !overdue.Before(item.Due):
		k.Bucket, k.At = BucketOverdue, item.Due
	case !item.Due.IsZero() && !item.Due.After(tomorrow):
		k.Bucket, k.At = BucketDueToday, item.Due
	case item.State == Open && item.Owner == "":
		k.Bucket, k.At = BucketNewUnowned, item.FlaggedAt
	case item.AwaitingReads > 0:
		k.Bucket, k.At = BucketAwaitingOverRead, item.RecordingReceivedAt
	case item.Mine:
		k.Bucket, k.At, k.Undated = BucketMine, item.Due, item.Due.IsZero()
	default:
		k.Bucket, k.At, k.Undated = BucketOther, item.Due, item.Due.IsZero()
	}
	return k
}

// Deadlines are the two moments that split deadlines into Urgency's groups
// at now: a deadline at or before overdue is overdue, one after it and at or
// before today is due today (today is the next midnight in now's location).
// Storage counts the groups from kept sums with these moments.
func Deadlines(now time.Time) (overdue, today time.Time) {
	y, m, d := now.Date()
	return now, time.Date(y, m, d+1, 0, 0, 0, 0, now.Location())
}

// SortTriage orders items in place by Urgency at now. Keys are computed once
// and an index is sorted, so the (large) items move only once; the sort is
// stable, so items with identical keys keep their input order.
func SortTriage(items []TriageItem, now time.Time) {
	keys := make([]Key, len(items))
	order := make([]int, len(items))
	for i := range items {
		keys[i] = Urgency(items[i], now)
		order[i] = i
	}
	slices.SortFunc(order, func(a, b int) int {
		if c := keys[a].Compare(keys[b]); c != 0 {
			return c
		}
		return cmp.Compare(a, b) // input position: as stable as a stable sort, with fewer comparisons
	})
	sorted := make([]TriageItem, len(items))
	for i, j := range order {
		sorted[i] = items[j]
	}
	copy(items, sorted)
}

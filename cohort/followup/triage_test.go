package followup

import (
	"fmt"
	"slices"
	"strings"
	"testing"
	"time"
)

// triageList is a constructed morning list at Wednesday 2026-04-15 11:00 in
// Berlin, given in the order the rule must produce (case IDs c01, c02, ...).
// Owners and study IDs are invented.
func triageList(tb testing.TB) (items []TriageItem, now time.Time) {
	tb.Helper()
	loc := mustLoad(tb, "Europe/Berlin")
	mustWeekday(tb, "2026-04-15", time.Wednesday)
	now = at(tb, loc, "2026-04-15 11:00")
	t := func(s string) time.Time { return at(tb, loc, s) }
	items = []TriageItem{
		// overdue, most overdue first
		{CaseID: "c01", StudyID: "S-0107", State: Contacting, Owner: "coord-2", FlaggedAt: t("2026-04-01 09:00"), Due: t("2026-04-13 00:00")},
		{CaseID: "c02", StudyID: "S-0031", State: Open, FlaggedAt: t("2026-04-09 09:00"), Due: t("2026-04-14 00:00")}, // unowned but overdue: overdue wins
		{CaseID: "c03", StudyID: "S-0044", State: Reached, Owner: "coord-1", Due: t("2026-04-14 00:00")},              // same deadline: by study ID
		{CaseID: "c04", StudyID: "S-0044", State: RecordingReceived, Owner: "coord-1", Due: t("2026-04-14 00:00")},    // same study ID: by case ID
		{CaseID: "c05", StudyID: "S-0002", State: RecorderSent, Owner: "coord-1", Due: t("2026-04-15 10:00")},
		{CaseID: "c06", StudyID: "S-0999", State: OverRead, Owner: "coord-3", Due: now}, // due exactly now is overdue
		// due today, earliest deadline first
		{CaseID: "c07", StudyID: "S-0500", State: Contacting, Owner: "coord-2", Due: t("2026-04-15 15:00")},
		{CaseID: "c08", StudyID: "S-0001", State: Open, Owner: "coord-2", Due: t("2026-04-16 00:00")}, // end of today
		{CaseID: "c09", StudyID: "S-0003", State: Open, Due: t("2026-04-16 00:00")},                   // unowned, but due today first
		// new flags without an owner, oldest flag first
		{CaseID: "c10", StudyID: "S-0300", State: Open, FlaggedAt: t("2026-04-13 08:00"), Due: t("2026-04-16 00:00").Add(time.Nanosecond)},
		{CaseID: "c11", StudyID: "S-0100", State: Open, FlaggedAt: t("2026-04-14 08:00"), Due: t("2026-04-17 00:00")},
		{CaseID: "c12", StudyID: "S-0200", State: Open, FlaggedAt: t("2026-04-14 08:00"), Due: t("2026-04-17 00:00")}, // same flag time: by study ID
		// recordings waiting for an over-read, oldest recording first
		{CaseID: "c13", StudyID: "S-0400", State: RecordingReceived, Owner: "coord-1", RecordingReceivedAt: t("2026-04-10 12:00"), Due: t("2026-04-18 00:00"), AwaitingReads: 1},
		{CaseID: "c14", StudyID: "S-0050", State: RecordingReceived, RecordingReceivedAt: t("2026-04-13 12:00"), Due: t("2026-04-21 00:00"), AwaitingReads: 2},
		// the person's own cases with nothing urgent, earliest deadline first
		{CaseID: "c19", StudyID: "S-0900", State: Reached, Owner: "me", Due: t("2026-04-17 00:00"), Mine: true},
		{CaseID: "c20", StudyID: "S-0800", State: RecordingReceived, Owner: "me", Due: t("2026-04-20 00:00"), Mine: true}, // its recording read: a repeat is due
		{CaseID: "c21", StudyID: "S-0100", State: OverRead, Owner: "me", Mine: true},                                      // nothing due: last of the group
		// the rest by due date, nothing due last
		{CaseID: "c15", StudyID: "S-0600", State: Open, Owner: "coord-2", FlaggedAt: t("2026-04-01 08:00"), Due: t("2026-04-17 00:00")},
		{CaseID: "c16", StudyID: "S-0060", State: RecorderSent, Owner: "coord-3", Due: t("2026-04-27 00:00")},
		{CaseID: "c17", StudyID: "S-0001", State: Referred, Owner: "coord-1"},
		{CaseID: "c18", StudyID: "S-0070", State: ClosedDeclined},
	}
	return items, now
}

func TestSortTriage(t *testing.T) {
	want, now := triageList(t)
	wantIDs := make([]string, len(want))
	for i, it := range want {
		wantIDs[i] = it.CaseID
	}
	// Several input orders must all give the same list.
	inputs := [][]TriageItem{slices.Clone(want), slices.Clone(want)}
	slices.Reverse(inputs[1])
	for r := 1; r < len(want); r += 5 {
		in := append(slices.Clone(want[r:]), want[:r]...)
		inputs = append(inputs, in)
	}
	for i, in := range inputs {
		SortTriage(in, now)
		got := make([]string, len(in))
		for j, it := range in {
			got[j] = it.CaseID
		}
		if !slices.Equal(got, wantIDs) {
			t.Errorf("input order %d:\n got %v\nwant %v", i, got, wantIDs)
		}
	}
}

func TestUrgencyBuckets(t *testing.T) {
	items, now := triageList(t)
	want := map[string]Bucket{
		"c01": BucketOverdue, "c02": BucketOverdue, "c03": BucketOverdue, "c04": BucketOverdue, "c05": BucketOverdue, "c06": BucketOverdue,
		"c07": BucketDueToday, "c08": BucketDueToday, "c09": BucketDueToday,
		"c10": BucketNewUnowned, "c11": BucketNewUnowned, "c12": BucketNewUnowned,
		"c13": BucketAwaitingOverRead, "c14": BucketAwaitingOverRead,
		"c19": BucketMine, "c20": BucketMine, "c21": BucketMine,
		"c15": BucketOther, "c16": BucketOther, "c17": BucketOther, "c18": BucketOther,
	}
	for _, it := range items {
		if got := Urgency(it, now).Bucket; got != want[it.CaseID] {
			t.Errorf("%s: bucket %s, want %s", it.CaseID, got.Label(), want[it.CaseID].Label())
		}
	}
}

// TestUrgencyTodayFollowsZone: "today" is now's calendar day in the zone now
// is given in; the same deadline is "today" in one zone and not in another.
func TestUrgencyTodayFollowsZone(t *testing.T) {
	ny, berlin := mustLoad(t, "America/New_York"), mustLoad(t, "Europe/Berlin")
	now := time.Date(2026, 4, 15, 20, 0, 0, 0, time.UTC) // 16:00 in New York, 22:00 in Berlin
	item := TriageItem{CaseID: "c1", StudyID: "S-1", State: Reached, Owner: "coord-1",
		Due: time.Date(2026, 4, 16, 2, 0, 0, 0, time.UTC)} // 22:00 in New York, 04:00 next day in Berlin
	if got := Urgency(item, now.In(ny)).Bucket; got != BucketDueToday {
		t.Errorf("New York: %s, want due today", got.Label())
	}
	if got := Urgency(item, now.In(berlin)).Bucket; got != BucketOther {
		t.Errorf("Berlin: %s, want scheduled", got.Label())
	}
}

// TestKeyCompareIsAnOrder checks antisymmetry and transitivity of Compare on
// every pair and triple of the constructed list's keys.
func TestKeyCompareIsAnOrder(t *testing.T) {
	items, now := triageList(t)
	keys := make([]Key, len(items))
	for i, it := range items {
		keys[i] = Urgency(it, now)
	}
	for i := range keys {
		if keys[i].Compare(keys[i]) != 0 {
			t.Errorf("key %d not equal to itself", i)
		}
		for j := range keys {
			if keys[i].Compare(keys[j]) != -keys[j].Compare(keys[i]) {
				t.Errorf("keys %d, %d: not antisymmetric", i, j)
			}
			for k := range keys {
				if keys[i].Compare(keys[j]) < 0 && keys[j].Compare(keys[k]) < 0 && keys[i].Compare(keys[k]) >= 0 {
					t.Errorf("keys %d < %d < %d but not %d < %d", i, j, k, i, k)
				}
			}
		}
	}
}

func TestOrderRuleWording(t *testing.T) {
	if !strings.HasPrefix(OrderRule, "How this list is ordered: ") {
		t.Errorf("OrderRule starts %q", OrderRule[:30])
	}
	// The sentence names the groups in the order Urgency uses them.
	last := -1
	for _, phrase := range []string{"overdue", "due today", "new flags", "over-read", "your own", "all other cases", "study ID"} {
		i := strings.Index(OrderRule, phrase)
		if i <= last {
			t.Errorf("%q missing or out of order in OrderRule", phrase)
		}
		last = i
	}
	for b := BucketOverdue; b <= BucketOther; b++ {
		if b.Label() == "unknown" {
			t.Errorf("bucket %d has no label", b)
		}
	}
}

// benchItems builds n triage items spread over all groups, deterministically.
func benchItems(n int, now time.Time) []TriageItem {
	states := States()
	items := make([]TriageItem, n)
	for i := range items {
		items[i] = TriageItem{
			CaseID:              fmt.Sprintf("c%06d", i),
			StudyID:             fmt.Sprintf("S-%05d", i*7919%n),
			State:               states[i%len(states)],
			FlaggedAt:           now.Add(-time.Duration(i%500) * time.Hour),
			RecordingReceivedAt: now.Add(-time.Duration(i%300) * time.Hour),
			Due:                 now.Add(time.Duration(i%200-100) * time.Hour),
		}
		if i%3 == 0 {
			items[i].Owner = "coord-1"
		}
	}
	return items
}

// BenchmarkSortTriage sorts a 10,000-case list by the triage rule; compare
// with BenchmarkSortByDueBaseline, a plain sort by deadline, in the same run.
func BenchmarkSortTriage(b *testing.B) {
	now := time.Date(2026, 4, 15, 11, 0, 0, 0, time.UTC)
	src := benchItems(10000, now)
	items := make([]TriageItem, len(src))
	for b.Loop() {
		copy(items, src)
		SortTriage(items, now)
	}
}

func BenchmarkSortByDueBaseline(b *testing.B) {
	now := time.Date(2026, 4, 15, 11, 0, 0, 0, time.UTC)
	src := benchItems(10000, now)
	items := make([]TriageItem, len(src))
	for b.Loop() {
		copy(items, src)
		slices.SortStableFunc(items, func(x, y TriageItem) int { return x.Due.Compare(y.Due) })
	}
}

package web

import (
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"

	"github.com/chromedp/chromedp"
)

// TestSearchSortAndEmptyLists does a coordinator's look-ups in the browser on
// the small demo:
//   - a part of a study ID from its middle (its number without the leading
//     zero) finds the participant on the participant list, and the case on
//     the case list, which now has a search;
//   - the column headers sort the lists on the server (ascending, then
//     descending when clicked again), saying which way in aria-sort;
//   - a search that finds nothing says so instead of showing an empty table.
func TestSearchSortAndEmptyLists(t *testing.T) {
	a := newApp(t)
	f := newJourneyFixture(t, a)
	number := regexp.MustCompile(`\d+`).FindString(f.sid) // "0019" of QRW-0019-B
	part := strings.TrimLeft(number, "0")
	if len(part) < 2 {
		part = number[len(number)-2:]
	}
	tb := newTab(t, a, 3*time.Minute)
	tb.signIn(cohort.Coordinator)

	tb.open("/participants", "#q")
	tb.b.Do("type a part of the study ID", chromedp.SendKeys(chromedp.ID("q"), part))
	tb.follow("search", `[data-testid="participant-filter"] button[type="submit"], form[role="search"] button[type="submit"]`, "main")
	if ids := tb.eval(`Array.from(document.querySelectorAll('[data-testid="participants-table"] tbody td:first-child')).map(td => td.textContent.trim()).join(' ')`); !strings.Contains(ids, f.sid) {
		t.Errorf("searching %q finds %q, not %s", part, ids, f.sid)
	}

	tb.open("/cases?state=all", "#case-q")
	tb.b.Do("type a part of the study ID", chromedp.SendKeys(chromedp.ID("case-q"), part))
	tb.follow("search the cases", `[data-testid="case-filter"] button[type="submit"]`, "main")
	if ids := tb.eval(`Array.from(document.querySelectorAll('[data-testid="cases-table"] tbody tr')).map(tr => tr.textContent).join(' ')`); !strings.Contains(ids, f.sid) {
		t.Errorf("searching the cases for %q finds %q, not %s's case", part, ids, f.sid)
	}

	// Sorting by a column header, both ways.
	enrolled := func() []time.Time {
		var out []time.Time
		for _, s := range strings.Split(tb.eval(`Array.from(document.querySelectorAll('[data-testid="participants-table"] tbody tr')).map(tr => tr.children[tr.children.length - 4].textContent.trim()).join('|')`), "|") {
			d, err := time.Parse(cohort.DateLayout, s)
			if err != nil {
				t.Fatalf("enrolment day %q: %v", s, err)
			}
			out = append(out, d)
		}
		return out
	}
	tb.open("/participants", `[data-testid="sort-enrolled"]`)
	tb.follow("sort by enrolment", `[data-testid="sort-enrolled"]`, `th[aria-sort="ascending"] [data-testid="sort-enrolled"]`)
	days := enrolled()
	if len(days) < 10 || !slices.IsSortedFunc(days, func(a, b time.Time) int { return a.Compare(b) }) {
		t.Errorf("sorted by enrolment: %v", days)
	}
	tb.follow("sort by enrolment, the other way", `[data-testid="sort-enrolled"]`, `th[aria-sort="descending"] [data-testid="sort-enrolled"]`)
	days = enrolled()
	if !slices.IsSortedFunc(days, func(a, b time.Time) int { return b.Compare(a) }) {
		t.Errorf("sorted by enrolment, newest first: %v", days)
	}
	tb.open("/cases?state=all", `[data-testid="sort-study_id"]`)
	tb.follow("sort the cases by study ID", `[data-testid="sort-study_id"]`, `th[aria-sort="ascending"] [data-testid="sort-study_id"]`)
	ids := strings.Fields(tb.eval(`Array.from(document.querySelectorAll('[data-testid="cases-table"] tbody a.mono')).map(a => a.textContent.trim()).join(' ')`))
	if len(ids) < 2 || !slices.IsSorted(ids) {
		t.Errorf("cases sorted by study ID: %v", ids)
	}

	// Nothing found is said.
	tb.open("/participants?q=zzzz", "main")
	if !tb.has(`[data-testid="empty-list"]`) || !strings.Contains(tb.visibleText(), "No participant matches") {
		t.Error("a participant search that finds nothing does not say so")
	}
	tb.open("/cases?q=zzzz", "main")
	if !tb.has(`[data-testid="empty-list"]`) || !strings.Contains(tb.visibleText(), "No case matches") {
		t.Error("a case search that finds nothing does not say so")
	}
}

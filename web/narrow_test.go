package web

import (
	"encoding/json"
	"fmt"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"

	"github.com/chromedp/chromedp"
)

// narrowWidths are the window widths the work pages must fit: a small
// laptop window and a tablet held upright (768 CSS pixels, the common
// portrait width of 9.7-10.5 inch tablets; common practice).
var narrowWidths = []int64{800, 768}

// narrowCheck is what a page shows of itself at the window's width: how wide
// it is, what sticks out, study IDs broken over lines, and row-action cells
// that are not table cells (whose rows' borders then do not meet).
const narrowCheck = `(() => {
	const out = {width: document.documentElement.scrollWidth, over: [], wrapped: [], cells: []};
	const name = el => el.tagName.toLowerCase() + (el.dataset.testid ? '[' + el.dataset.testid + ']' : '') + (el.className && typeof el.className === 'string' ? '.' + el.className.trim().split(/\s+/).join('.') : '');
	for (const el of document.querySelectorAll('main *')) {
		const r = el.getBoundingClientRect();
		if (r.width && r.right > innerWidth + 1 && !el.closest('[aria-hidden="true"], svg')) out.over.push(name(el) + ' to ' + Math.round(r.right) + ' px');
	}
	for (const el of document.querySelectorAll('table a.mono, table span.mono')) {
		if (!/^[A-Z]{2,4}-\d/.test(el.textContent.trim())) continue;
		if (el.getClientRects().length > 1) out.wrapped.push(el.textContent.trim());
	}
	for (const td of document.querySelectorAll('td.quick-actions')) {
		const tr = td.closest('tr');
		if (getComputedStyle(td).display !== 'table-cell' || Math.abs(td.getBoundingClientRect().bottom - tr.getBoundingClientRect().bottom) > 1)
			out.cells.push(tr.id || tr.dataset.testid || 'a row');
	}
	out.over = out.over.slice(0, 5);
	return JSON.stringify(out);
})()`

// TestWorkPagesFitNarrowWindows opens every work page in the browser, as a
// coordinator and as an administrator, in an 800 px window and at a tablet's
// width: nothing sticks out beyond the window (the page is as wide as the
// window), no study ID in a table breaks over two lines, and the row-actions
// cells of triage stay table cells reaching the row's bottom border. The
// audit trail, an administrator's wide table, fits a 1366 px window.
func TestWorkPagesFitNarrowWindows(t *testing.T) {
	a := newApp(t)
	pages := a11yFixture(t, a)
	for _, role := range []cohort.Role{cohort.Coordinator, cohort.Admin} {
		t.Run(string(role), func(t *testing.T) {
			t.Parallel()
			tb := newTab(t, a, 5*time.Minute)
			tb.signIn(role)
			for _, width := range narrowWidths {
				tb.b.Do(fmt.Sprintf("a %d px window", width), chromedp.EmulateViewport(width, 900))
				for _, pg := range pages {
					acc, _ := a.srv.accessOf("GET", pg.pattern)
					if !acc.allows(role) || pg.name == "audit trail" {
						continue
					}
					tb.open(pg.path, "main")
					checkNarrow(t, tb, fmt.Sprintf("%s as %s at %d px", pg.name, role, width), width)
				}
			}
			if role == cohort.Admin {
				tb.b.Do("a 1366 px window", chromedp.EmulateViewport(1366, 900))
				tb.open("/admin/audit", "main")
				checkNarrow(t, tb, "the audit trail at 1366 px", 1366)
			}
		})
	}
}

func checkNarrow(t *testing.T, tb *tab, what string, width int64) {
	t.Helper()
	var got struct {
		Width   int64
		Over    []string
		Wrapped []string
		Cells   []string
	}
	if err := json.Unmarshal([]byte(tb.eval(narrowCheck)), &got); err != nil {
		t.Fatalf("%s: %v", what, err)
	}
	if got.Width > width {
		t.Errorf("%s: the page is %d px wide; sticking out: %s", what, got.Width, strings.Join(got.Over, "; "))
	}
	if len(got.Wrapped) > 0 {
		t.Errorf("%s: study IDs broken over lines: %v", what, got.Wrapped)
	}
	if len(got.Cells) > 0 {
		t.Errorf("%s: row-action cells that break their row's borders: %v", what, got.Cells)
	}
}

package web

import (
	"context"
	"fmt"
	"math"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/overread"

	"github.com/chromedp/chromedp"
)

// recordedCases gives n cases in "recording received", each with a
// synthetic recording of s seconds in atrial fibrillation, received one
// after the other; it returns the recording ids in the queue's order.
func recordedCases(t *testing.T, a *app, n int, s float64) []int64 {
	t.Helper()
	ctx := context.Background()
	coord := a.users[cohort.Coordinator].Actor("127.0.0.1", "test")
	var recs []int64
	for i, id := range shippedCases(t, a, n) {
		syn, err := ecg.Synthesize(ecgtest.AFRR(int(s/0.7), 700, uint64(40+i)), ecg.SynthOptions{RateHz: 250})
		if err != nil {
			t.Fatal(err)
		}
		rec, err := a.store.AddRecording(ctx, coord, id, ecg.RecordingInput{TakenAt: time.Now(), Auto: overread.AutoSuggestsAF,
			Samples: syn.Waveform.Samples, RateHz: syn.Waveform.RateHz})
		if err != nil {
			t.Fatal(err)
		}
		recs = append(recs, rec.ID)
	}
	return recs
}

// TestBrowserOverReadSeries (issue 19, finding 5) reads three recordings in
// a row as an investigator, counting the clicks: the confidence is not
// chosen for the reader, and each saved reading opens the next recording
// waiting, without going back to the list. Then the reader amends a
// reading with a reason: the earlier one is kept and shown as superseded.
func TestBrowserOverReadSeries(t *testing.T) {
	a := newApp(t)
	recs := recordedCases(t, a, 3, 35)
	tb := newTab(t, a, 3*time.Minute)
	b := tb.b
	tb.signIn(cohort.Investigator)
	clicks := 0
	tb.follow("open the over-read list", `[data-testid="nav-confirmations"]`, `[data-testid="unread-table"]`)
	clicks++
	tb.follow("open the first recording waiting", fmt.Sprintf(`[data-testid="unread-table"] a[href="/recordings/%d"]`, recs[0]), `[data-testid="form-over-read"]`)
	clicks++
	for i, id := range recs {
		if got := b.Location(); !strings.HasSuffix(strings.SplitN(got, "?", 2)[0], fmt.Sprintf("/recordings/%d", id)) {
			t.Fatalf("reading %d: at %s, want recording %d", i+1, got, id)
		}
		if v := tb.eval(`document.getElementById('confidence').value`); v != "" {
			t.Errorf("recording %d: confidence %q chosen before the reader chose it", id, v)
		}
		b.Do("choose the rhythm and the confidence",
			chromedp.Click(chromedp.CSS(`input[name="rhythm"][value="af"]`)),
			chromedp.SetValue(chromedp.ID("confidence"), "probable"),
		)
		clicks += 2
		if i < len(recs)-1 {
			tb.follow("enter it and go on", `[data-testid="enter-over-read-next"]`, `[data-testid="next-recording-note"]`)
		} else {
			if tb.has(`[data-testid="enter-over-read-next"]`) {
				t.Error("the last recording waiting offers a next one")
			}
			tb.follow("enter the last one", `[data-testid="enter-over-read"]`, `[data-testid="readings"]`)
		}
		clicks++
	}
	// Two to reach the first, three per recording: rhythm, confidence, save.
	if want := 2 + 3*len(recs); clicks != want {
		t.Errorf("%d clicks for %d over-reads, want %d", clicks, len(recs), want)
	}
	t.Logf("over-read series: %d clicks for %d recordings", clicks, len(recs))
	var n int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM over_reads WHERE rhythm = 'af' AND confidence = 'probable'`).Scan(&n)
	if n != len(recs) {
		t.Fatalf("%d readings stored, want %d", n, len(recs))
	}

	// The reader corrects the last reading.
	b.Do("open the correction",
		chromedp.Click(chromedp.CSS(`[data-testid="form-revise"] summary`)),
		chromedp.Click(chromedp.CSS(`[data-testid="form-revise"] input[name="change"][value="amended"]`)),
		chromedp.SetValue(chromedp.ID("revise-rhythm"), "flutter"),
		chromedp.SendKeys(chromedp.ID("revise-reason"), "regular flutter waves on a second look"),
	)
	tb.follow("save the correction", `[data-testid="revise-reading"]`, `[data-testid="earlier-readings"]`)
	if got := b.Text("verdict", `[data-testid="recording-verdict"]`); got != "atrial flutter" {
		t.Errorf("verdict after the amendment %q", got)
	}
	if got := b.Text("earlier", `[data-testid="earlier-amended"]`); !strings.Contains(got, "atrial fibrillation") || !strings.Contains(got, "regular flutter waves") {
		t.Errorf("the superseded reading shows as %q", got)
	}
}

// TestBrowserStripZoomAndCalliper (issue 19, finding 5): the strip zooms
// into a stretch, magnified on the paper's own grid, and the calliper
// between two beat marks reads the interval between those beats, on the
// strip and on the zoomed stretch.
func TestBrowserStripZoomAndCalliper(t *testing.T) {
	a := newApp(t)
	recs := recordedCases(t, a, 1, 32)
	rec, err := a.store.Recording(context.Background(), recs[0])
	if err != nil {
		t.Fatal(err)
	}
	tb := newTab(t, a, 2*time.Minute)
	b := tb.b
	tb.signIn(cohort.Investigator)
	tb.open(fmt.Sprintf("/recordings/%d", recs[0]), `[data-testid="strip-tools"]`)

	// The beat marks' x on the paper (mm), and the recording's own beat
	// intervals in ms, from the stored beats.
	var rr []float64
	for i := 1; i < len(rec.Beats); i++ {
		rr = append(rr, float64(rec.Beats[i]-rec.Beats[i-1])/rec.RateHz*1000)
	}
	// clickTicks clicks the k-th and (k+1)-th beat marks of the first row
	// inside svg (a CSS selector) and returns the interval between them on
	// the paper, in ms at 25 mm/s.
	clickTicks := func(svg string, k int) float64 {
		t.Helper()
		js := `(() => {
			const svg = document.querySelector(` + jsString(svg) + `);
			svg.scrollIntoView({block: "center", inline: "center"});
			const vb = svg.viewBox.baseVal;
			const ticks = Array.from(svg.querySelectorAll('path')).map(p => p.getAttribute('d'))
				.filter(d => /^M [0-9.]+ [0-9.]+ v 2$/.test(d)).map(d => d.split(' ').map(Number))
				.filter(m => m[1] >= vb.x && m[1] <= vb.x + vb.width && m[2] >= vb.y && m[2] < vb.y + 30);
			const m = svg.getScreenCTM();
			const at = (x, y) => { const p = svg.createSVGPoint(); p.x = x; p.y = y; return p.matrixTransform(m); };
			const a = ticks[` + strconv.Itoa(k) + `], b = ticks[` + strconv.Itoa(k+1) + `];
			const pa = at(a[1], a[2] + 12), pb = at(b[1], b[2] + 12);
			return [pa.x, pa.y, pb.x, pb.y, (b[1] - a[1]) / 25 * 1000];
		})()`
		v, err := chromedp.Run(b.Context(), chromedp.Evaluate[[]float64](js))
		if err != nil || len(v) != 5 {
			t.Fatalf("beat marks in %s: %v %v", svg, v, err)
		}
		b.Do("click two beat marks", chromedp.MouseClickXY(v[0], v[1]), chromedp.MouseClickXY(v[2], v[3]))
		return v[4]
	}
	reading := func() float64 {
		t.Helper()
		ms, err := strconv.ParseFloat(tb.eval(`document.querySelector('[data-testid="calliper-reading"]').getAttribute('data-ms') || ''`), 64)
		if err != nil {
			t.Fatalf("no calliper reading: %q", tb.eval(`document.querySelector('[data-testid="calliper-reading"]').textContent`))
		}
		return ms
	}
	nearestRR := func(ms float64) float64 {
		best := math.Inf(1)
		for _, v := range rr {
			if math.Abs(v-ms) < math.Abs(best-ms) {
				best = v
			}
		}
		return best
	}

	b.Do("calliper on", chromedp.Click(chromedp.CSS(`[data-testid="strip-calliper"]`)))
	ticks := clickTicks(`figure.strip > svg`, 2)
	got := reading()
	// One CSS pixel is 25.4/96 mm, 10.6 ms at 25 mm/s: the click lands
	// within a pixel of the mark.
	if math.Abs(got-ticks) > 12 || math.Abs(nearestRR(ticks)-ticks) > 1 {
		t.Errorf("calliper on the strip reads %.1f ms between marks %.1f ms apart (nearest stored interval %.1f ms)", got, ticks, nearestRR(ticks))
	}

	b.Do("zoom into a stretch",
		chromedp.Click(chromedp.CSS(`[data-testid="strip-clear"]`)),
		chromedp.SetValue(chromedp.CSS(`[data-testid="strip-zoom-factor"]`), "4"),
		chromedp.Click(chromedp.CSS(`[data-testid="strip-zoom"]`)),
		chromedp.Click(chromedp.CSS(`figure.strip > svg`)),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="strip-zoomed"] svg`)),
	)
	// ×4 of a 50 mm stretch: 200 mm on screen, at 96/25.4 CSS px per mm,
	// with the grid's 1 mm squares magnified alike (the squares are in the
	// paper's units).
	if w := tb.eval(`String(document.querySelector('[data-testid="strip-zoomed"] svg').getBoundingClientRect().width)`); math.Abs(mustFloat(t, w)-200*96/25.4) > 1 {
		t.Errorf("zoomed stretch %s px wide, want %.1f", w, 200*96/25.4)
	}
	if vb := tb.eval(`document.querySelector('[data-testid="strip-zoomed"] svg').getAttribute('viewBox')`); !strings.HasSuffix(vb, " 50 30") {
		t.Errorf("zoomed viewBox %q, want a 50 mm stretch of one 30 mm row", vb)
	}
	ticks = clickTicks(`[data-testid="strip-zoomed"] svg`, 0)
	got = reading()
	// Magnified four times, a pixel is 2.6 ms.
	if math.Abs(got-ticks) > 4 || math.Abs(nearestRR(ticks)-ticks) > 1 {
		t.Errorf("calliper on the zoomed stretch reads %.1f ms between marks %.1f ms apart", got, ticks)
	}
	if caption := b.Text("zoom caption", `[data-testid="strip-zoomed"] p`); !strings.Contains(caption, "25 mm/s and 10 mm/mV") || !strings.Contains(caption, "×4") {
		t.Errorf("zoom caption %q", caption)
	}
}

// TestRecordingNotNeededLeavesTheQueue (issue 19, finding 2): an
// investigator takes a recording off the over-read list with a reason; it
// leaves the queue and its count, the page says why, and other roles cannot.
func TestRecordingNotNeededLeavesTheQueue(t *testing.T) {
	a := newApp(t)
	recs := recordedCases(t, a, 2, 31)
	inv := a.signIn(cohort.Investigator)
	path := fmt.Sprintf("/recordings/%d/not-needed", recs[0])
	if res := a.postForm(a.signIn(cohort.Coordinator), path, url.Values{"reason": {"x"}}); res.StatusCode != http.StatusForbidden {
		t.Errorf("a coordinator marks a recording: status %d", res.StatusCode)
	}
	res, body := a.postFormBody(inv, path, url.Values{"reason": {" "}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-not_needed_reason"`) {
		t.Errorf("a mark without a reason: status %d", res.StatusCode)
	}
	if res := a.postForm(inv, path, url.Values{"reason": {"a repeat replaced it"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("mark: status %d", res.StatusCode)
	}
	_, page := a.get(inv, fmt.Sprintf("/recordings/%d", recs[0]))
	if !strings.Contains(page, `data-testid="not-needed"`) || !strings.Contains(page, "a repeat replaced it") || strings.Contains(page, `data-testid="form-not-needed"`) {
		t.Error("the recording page does not say it needs no over-read")
	}
	_, page = a.get(inv, "/confirmations")
	if got := byTestID(page, "unread-count"); got != "1" || strings.Contains(page, fmt.Sprintf(`href="/recordings/%d"`, recs[0])) {
		t.Errorf("the queue after the mark: count %q", got)
	}
}

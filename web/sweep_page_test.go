package web

import (
	"context"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"

	"github.com/chromedp/chromedp"
)

// internalKey is a protocol parameter's stored path ("windows[1].masd_threshold",
// "rr.nrmssd_min"): never a title on a page.
var internalKey = regexp.MustCompile(`windows\[\d+\]|\b(rr|baseline)\.[a-z_]+|[a-z]+_[a-z]+_?[a-z]*_threshold\b|masd_threshold`)

// TestThresholdSweepChangesSomething does an investigator's threshold sweep
// in the browser on the small demo with confirmed cases:
//   - the page opens on the threshold of the window size that decides the
//     demo's flags, says its value before any run, and its default range
//     changes how many weeks flag;
//   - choosing another parameter moves From and To to that parameter's range
//     and says its value;
//   - no stored parameter path appears as a title (page, chart, job list);
//   - a sentence links the sweep's per-week PPV with the statistics'
//     per-episode PPV, on both pages;
//   - the statistics' PPV chart labels every subgroup's interval.
func TestThresholdSweepChangesSomething(t *testing.T) {
	a := newApp(t)
	demoCanaries(t, a)
	ctx := context.Background()
	proto := protocolFor(t, a)
	pv, err := a.store.Protocol(ctx, proto)
	if err != nil {
		t.Fatal(err)
	}
	tb := newTab(t, a, 3*time.Minute)
	tb.signIn(cohort.Investigator)
	tb.open("/sweep", `[data-testid="sweep-form"]`)

	param := tb.eval(`document.getElementById('param').value`)
	i, ok, err := a.store.DecidingWindow(ctx, proto)
	if err != nil || !ok {
		t.Fatalf("deciding window: %d %v %v", i, ok, err)
	}
	if want := "windows[" + strconv.Itoa(i) + "].masd_threshold"; param != want {
		t.Errorf("the sweep opens on %s, want the deciding window's threshold %s", param, want)
	}
	current := strconv.FormatFloat(pv.Params.Windows[i].MASDThreshold, 'g', -1, 64)
	if got := tb.b.Text("current value", `[data-testid="sweep-current"] [data-sweep-current]`); got != current {
		t.Errorf("before a run the page says the value is %q, want %s", got, current)
	}

	// Another parameter: the range follows it.
	other := "windows[" + strconv.Itoa(i) + "].run_length"
	tb.b.Do("choose the run length", chromedp.SetValue(chromedp.ID("param"), other))
	tb.eval(`document.getElementById('param').dispatchEvent(new Event('change', {bubbles: true}))`)
	run := pv.Params.Windows[i].RunLength
	wantFrom := screen.SweepValues(float64(run)*0.5, 0, 1, true)[0]
	wantTo := screen.SweepValues(float64(run)*1.5, 0, 1, true)[0]
	if from, to := tb.eval(`document.getElementById('from').value`), tb.eval(`document.getElementById('to').value`); from != strconv.FormatFloat(wantFrom, 'g', -1, 64) || to != strconv.FormatFloat(wantTo, 'g', -1, 64) {
		t.Errorf("after choosing the run length the range is %s to %s, want %v to %v", from, to, wantFrom, wantTo)
	}
	if got := tb.b.Text("current value", `[data-sweep-current]`); got != strconv.Itoa(run) {
		t.Errorf("after choosing the run length the page says its value is %q, want %d", got, run)
	}

	// Back to the opening parameter and its range; run it.
	tb.open("/sweep", `[data-testid="sweep-form"]`)
	tb.follow("start the sweep", `[data-testid="sweep-form"] button[type="submit"]`, `[data-testid="sweep-run"]`)
	if ok, err := (&db.Worker{Store: a.store, Handlers: db.NewScreener(a.store, nil).Handlers()}).RunOne(ctx, 0); !ok || err != nil {
		t.Fatalf("run the sweep: %v %v", ok, err)
	}
	tb.open(strings.TrimPrefix(tb.b.Location(), a.ts.URL), `[data-testid="sweep-table"]`)
	flagged := map[string]bool{}
	for _, n := range strings.Split(tb.eval(`Array.from(document.querySelectorAll('[data-testid="sweep-table"] tbody tr')).map(tr => tr.children[1].textContent.trim()).join(',')`), ",") {
		flagged[n] = true
	}
	if len(flagged) < 2 {
		t.Errorf("over the default range every value flags the same weeks: %v", flagged)
	}
	text := tb.visibleText()
	if m := internalKey.FindAllString(text, 3); len(m) > 0 {
		t.Errorf("the sweep page shows stored parameter paths: %v", m)
	}
	if !strings.Contains(tb.b.Text("PPV units", `[data-testid="ppv-units"]`), "Per-episode PPV") {
		t.Error("the sweep page does not link its per-week PPV with the per-episode PPV")
	}
	tb.open("/screening", "main")
	if m := internalKey.FindAllString(tb.visibleText(), 3); len(m) > 0 {
		t.Errorf("the screening jobs show stored parameter paths: %v", m)
	}

	tb.open("/confirmations/statistics", `[data-testid="chart-ppv"]`)
	if !strings.Contains(tb.b.Text("PPV units", `[data-testid="ppv-units"]`), "Per-week PPV") {
		t.Error("the statistics page does not link its per-episode PPV with the sweep's per-week PPV")
	}
	groups := strings.Split(tb.eval(`Array.from(document.querySelectorAll('[data-testid="groups-table"] tbody tr')).filter(tr => tr.querySelector('[data-testid="ppv"]').textContent.trim() !== '—').map(tr => tr.children[0].textContent.trim()).join('\n')`), "\n")
	tb.b.Do("wait for the chart", chromedp.WaitVisible(chromedp.CSS(`[data-testid="chart-ppv"] svg`)))
	chartText := tb.eval(`document.querySelector('[data-testid="chart-ppv"] svg').textContent`)
	if len(groups) < 4 {
		t.Fatalf("only %d subgroups with a PPV: the chart check would say little", len(groups))
	}
	for _, g := range groups {
		if !strings.Contains(chartText, g) {
			t.Errorf("the PPV chart does not label the interval of %q", g)
		}
	}
}

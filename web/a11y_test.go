package web

import (
	"context"
	"fmt"
	"os"
	"slices"
	"strconv"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/cohort/ecg"
	"cohortdesk/db"

	"github.com/chromedp/cdproto/cdp"
	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"
)

// axeScript is the accessibility checker run inside the browser: axe-core
// from npm, committed under testdata/axe (version and licence there). It is
// test code; the application never serves it.
const axeScript = "testdata/axe/axe.min.js"

// axeViolation is one failed rule with the elements that fail it.
type axeViolation struct {
	ID     string `json:"id"`
	Impact string `json:"impact"`
	Help   string `json:"help"`
	Nodes  []struct {
		Target  string `json:"target"`
		Summary string `json:"summary"`
	} `json:"nodes"`
}

// String names the rule, its impact and where it fails, for a test failure.
func (v axeViolation) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s (%s): %s", v.ID, v.Impact, v.Help)
	for i, n := range v.Nodes {
		if i == 8 {
			fmt.Fprintf(&b, "\n      ... and %d more", len(v.Nodes)-i)
			break
		}
		fmt.Fprintf(&b, "\n      %s\n        %s", n.Target, strings.ReplaceAll(strings.TrimSpace(n.Summary), "\n", "\n        "))
	}
	return b.String()
}

// axeRun runs every rule axe enables by default (WCAG 2.0-2.2 A and AA and
// its best practices) on the whole page and returns the violations.
const axeRun = `axe.run(document, {resultTypes: ['violations']}).then(r => r.violations.map(v => ({
	id: v.id, impact: v.impact || '', help: v.help,
	nodes: v.nodes.map(n => ({target: n.target.map(String).join(' '), summary: n.failureSummary || ''}))
})))`

// unlabelled lists the form controls a person using a screen reader could
// not name: no <label>, no aria-label, no aria-labelledby.
const unlabelled = `Array.from(document.querySelectorAll('input, select, textarea'))
	.filter(el => !['hidden', 'submit', 'button', 'reset', 'image'].includes(el.type))
	.filter(el => !(el.labels && el.labels.length) && !el.getAttribute('aria-label') && !el.getAttribute('aria-labelledby'))
	.map(el => el.outerHTML.slice(0, 160))`

// a11yKit defines the page-side helpers of the checks axe-core leaves out:
// the colour next to an element (what is painted just outside its box), the
// contrast ratio of two CSS colours, whether a form control's boundary can
// be seen, and how the focused element is marked.
//
// Contrast ratio, WCAG 2.x definition (verified, secondary: the terms of the
// WCAG source, "contrast ratio" and "relative luminance"): (L1 + 0.05) /
// (L2 + 0.05) with L = 0.2126 R + 0.7152 G + 0.0722 B of the channels
// linearised as c/12.92 when c <= 0.03928, else ((c + 0.055)/1.055)^2.4.
// The 3:1 minimum for a control's boundary and its focus indicator against
// the adjacent colour is WCAG 2.1 success criterion 1.4.11, Non-text
// Contrast, level AA (verified, secondary: published explanations quoting
// the criterion).
const a11yKit = `window.__a11y = (() => {
	const rgb = c => { const m = c.match(/rgba?\(([^)]+)\)/); if (!m) return null;
		const p = m[1].split(/[ ,\/]+/).filter(Boolean).map(Number); return {r: p[0], g: p[1], b: p[2], a: p.length > 3 ? p[3] : 1}; };
	const lum = c => { const f = v => { v /= 255; return v <= 0.03928 ? v / 12.92 : Math.pow((v + 0.055) / 1.055, 2.4); };
		return 0.2126 * f(c.r) + 0.7152 * f(c.g) + 0.0722 * f(c.b); };
	const ratio = (a, b) => { const x = lum(a), y = lum(b); return (Math.max(x, y) + 0.05) / (Math.min(x, y) + 0.05); };
	const opaque = el => { const c = rgb(getComputedStyle(el).backgroundColor); return c && c.a > 0 ? c : null; };
	// The colour painted just outside el's box, at (x, y): the first element
	// there, above or below, that is not el or inside it and has a background.
	const behind = (el, x, y) => {
		x = Math.min(Math.max(x, 0), innerWidth - 1); y = Math.min(Math.max(y, 0), innerHeight - 1);
		for (const e of document.elementsFromPoint(x, y)) {
			if (e === el || el.contains(e)) continue;
			const c = opaque(e); if (c) return c;
		}
		return {r: 255, g: 255, b: 255, a: 1};
	};
	// A stable name for an element across calls; the radios of a group
	// share one, as Tab stops once per group.
	const key = el => {
		if (el.type === 'radio' && el.name) return 'radio:' + (el.form ? el.form.getAttribute('data-testid') || '' : '') + ':' + el.name;
		if (!el.__a11yKey) { window.__a11yN = (window.__a11yN || 0) + 1; el.__a11yKey = 'el' + window.__a11yN; }
		return el.__a11yKey;
	};
	const describe = el => el.tagName.toLowerCase() + (el.id ? '#' + el.id : '') +
		(el.getAttribute('data-testid') ? '[data-testid=' + el.getAttribute('data-testid') + ']' : '') +
		(el.className && typeof el.className === 'string' ? '.' + el.className.trim().split(/\s+/).join('.') : '');
	return {
		// Visible form controls whose edge (border, or fill against what is
		// around) contrasts less than 3:1 with the colour beside them.
		faintControls() {
			const out = [];
			for (const el of document.querySelectorAll('input, select, textarea')) {
				if (['hidden', 'checkbox', 'radio', 'range', 'color', 'submit', 'button', 'reset', 'image', 'file'].includes(el.type)) continue;
				const r = el.getBoundingClientRect(); if (!r.width || !r.height || el.closest('[hidden], details:not([open])')) continue;
				const s = getComputedStyle(el); if (s.visibility === 'hidden') continue;
				el.scrollIntoView({block: 'center'});
				const q = el.getBoundingClientRect();
				const around = behind(el, q.left - 4, q.top + q.height / 2);
				const fill = opaque(el) || around;
				const edge = parseFloat(s.borderLeftWidth) > 0 && s.borderLeftStyle !== 'none' ? rgb(s.borderLeftColor) : fill;
				const best = Math.max(ratio(edge, around), ratio(fill, around));
				if (best < 3) out.push(describe(el) + ' edge ' + best.toFixed(2) + ':1');
			}
			return out;
		},
		// Refusals a screen reader would not tie to their field: a control
		// marked invalid whose description says nothing, and a field's
		// message (id NAME-error) that its control does not point to.
		unlinkedErrors() {
			const out = [];
			for (const el of document.querySelectorAll('[aria-invalid="true"]')) {
				const ids = (el.getAttribute('aria-describedby') || '').split(/\s+/).filter(Boolean);
				const said = ids.map(id => document.getElementById(id)).filter(Boolean).map(e => e.textContent.trim()).join(' ');
				if (!said) out.push(describe(el) + ' is marked invalid but its description says nothing');
			}
			for (const e of document.querySelectorAll('.field-error[id$="-error"]')) {
				const name = e.id.slice(0, -'-error'.length);
				const controls = [document.getElementById(name), ...document.getElementsByName(name)].filter(Boolean);
				if (controls.length && !controls.some(c => (c.getAttribute('aria-describedby') || '').split(/\s+/).includes(e.id)))
					out.push(describe(e) + ' is not tied to its control');
			}
			return out;
		},
		// The controls a person can see and use, by key: links, buttons,
		// fields, the summaries of folded sections, anything given a
		// tab stop.
		controls() {
			const out = {};
			for (const el of document.querySelectorAll('a[href], button, input:not([type=hidden]), select, textarea, summary, [tabindex]')) {
				if (el.disabled || el.getAttribute('tabindex') === '-1' || el.closest('[inert], [hidden]')) continue;
				const d = el.closest('details');
				if (d && !d.open && !(el.tagName === 'SUMMARY' && el.parentElement === d)) continue;
				const s = getComputedStyle(el); if (s.visibility === 'hidden') continue;
				const r = el.getBoundingClientRect(); if (!r.width || !r.height) continue;
				out[key(el)] = describe(el);
			}
			return out;
		},
		// The focused element, its row and form, and how visible its focus
		// mark is: the outline's width and its contrast with the colour
		// beside the outline on each side that is on screen.
		focused() {
			const el = document.activeElement;
			const s = getComputedStyle(el);
			const r = el.getBoundingClientRect();
			const w = s.outlineStyle === 'none' ? 0 : parseFloat(s.outlineWidth) || 0;
			const off = parseFloat(s.outlineOffset) || 0;
			const ring = rgb(s.outlineColor);
			let sides = [];
			if (w > 0 && ring) {
				const d = off + w + 1;
				sides = [[r.left - d, r.top + r.height / 2], [r.right + d, r.top + r.height / 2],
					[r.left + r.width / 2, r.top - d], [r.left + r.width / 2, r.bottom + d]]
					.filter(([x, y]) => x >= 0 && y >= 0 && x < innerWidth && y < innerHeight)
					.map(([x, y]) => Math.round(ratio(ring, behind(el, x, y)) * 100) / 100);
			}
			const row = el.closest('[data-row]'), form = el.closest('form');
			return {key: key(el), body: el === document.body || el === document.documentElement, inner: !el.matches(':focus'),
				what: describe(el), id: el.id, tag: el.tagName.toLowerCase(), row: row ? row.id : '',
				form: form ? form.getAttribute('data-testid') || '' : '', outline: w, sides: sides,
				onScreen: r.width > 0 && r.height > 0 && r.right > 0 && r.bottom > 0 && r.left < innerWidth && r.top < innerHeight};
		},
	};
})()`

// axe runs axe-core, which preload put in the page, on the page shown.
func (tb *tab) axe() []axeViolation {
	tb.t.Helper()
	if tb.eval(`typeof axe`) != "object" {
		tb.t.Fatal("axe-core is not in the page: preload it first")
	}
	got, err := chromedp.Run(tb.b.Context(), chromedp.Evaluate[[]axeViolation](axeRun, chromedp.EvalAwaitPromise))
	if err != nil {
		shot := tb.b.Screenshot("axe")
		tb.t.Fatalf("run axe-core: %v (screenshot: %s)", err, shot)
	}
	return got
}

// a11yFixture fills a test app with what every main page needs to show
// something: the small demo, confirmed cases with recordings (demoCanaries),
// and one issued summary. It returns the pages to check.
func a11yFixture(t *testing.T, a *app) []a11yPage {
	t.Helper()
	_, _, pids, cases := demoCanaries(t, a)
	sids := make([]string, 0, len(pids))
	for sid := range pids {
		sids = append(sids, sid)
	}
	slices.Sort(sids)
	sid := sids[0]
	pid, caseID := pids[sid], cases[sid]
	ctx := context.Background()
	var rec int64
	if err := a.store.Pool().QueryRow(ctx, `SELECT id FROM recordings WHERE case_id = $1 ORDER BY id LIMIT 1`, caseID).Scan(&rec); err != nil {
		t.Fatal(err)
	}
	ref := issueVia(t, a, a.signIn(cohort.Coordinator), pid, caseID, "html", paperA4)
	// Triage lists a case nobody has taken on, overdue: the row the
	// coordinator's pass takes.
	a.exec(`UPDATE cases SET due_at = now() - interval '1 day', owner_id = NULL WHERE id = $1`, cases[sids[1]])
	proto := protocolFor(t, a)
	p := func(name, pattern, path string) a11yPage { return a11yPage{name, pattern, path} }
	pages := []a11yPage{
		p("start", "/", "/"),
		p("triage", "/triage", "/triage"),
		p("participants list", "/participants", "/participants"),
		p("participant page", "/participants/{id}", fmt.Sprintf("/participants/%d", pid)),
		p("participant edit", "/participants/{id}/edit", fmt.Sprintf("/participants/%d/edit", pid)),
		p("new participant", "/participants/new", "/participants/new"),
		p("cases list", "/cases", "/cases"),
		p("case page", "/cases/{id}", fmt.Sprintf("/cases/%d", caseID)),
		p("contact details", "/cases/{id}/contact", fmt.Sprintf("/cases/%d/contact", caseID)),
		p("recording page", "/recordings/{id}", fmt.Sprintf("/recordings/%d", rec)),
		p("confirmations", "/confirmations", "/confirmations"),
		p("statistics", "/confirmations/statistics", "/confirmations/statistics"),
		p("progress", "/progress", "/progress"),
		p("screening", "/screening", "/screening"),
		p("external verdicts", "/screening/external", "/screening/external"),
		p("threshold sweep form", "/sweep", "/sweep"),
		p("imports", "/imports", "/imports"),
		p("new import", "/imports/new", "/imports/new"),
		p("exports", "/exports", "/exports"),
		p("referral preview", "/participants/{id}/referral", fmt.Sprintf("/participants/%d/referral?case=%d", pid, caseID)),
		p("referral summary", "/referrals/{id}", "/referrals/"+ref),
		p("administration", "/admin", "/admin"),
		p("accounts", "/admin/users", "/admin/users"),
		p("account", "/admin/users/{id}", fmt.Sprintf("/admin/users/%d", a.users[cohort.Coordinator].ID)),
		p("audit trail", "/admin/audit", "/admin/audit"),
		p("study settings", "/admin/study", "/admin/study"),
		p("protocols", "/admin/protocols", "/admin/protocols"),
		p("protocol", "/admin/protocols/{id}", fmt.Sprintf("/admin/protocols/%d", proto)),
		p("new protocol version", "/admin/protocols/{id}/new", fmt.Sprintf("/admin/protocols/%d/new", proto)),
		p("sign-in security", "/admin/security", "/admin/security"),
		p("your account", "/account", "/account"),
		p("change password", "/account/password", "/account/password"),
		p("second factor set-up", "/account/second-factor", "/account/second-factor"),
	}
	// A threshold sweep, computed, with its chart and table.
	sweep, err := a.store.StartSweep(ctx, cohort.Actor{Name: "Investigator", Role: cohort.Investigator}, proto, "windows[0].masd_threshold", []float64{4, 8, 12})
	if err != nil {
		t.Fatal(err)
	}
	if ok, err := (&db.Worker{Store: a.store, Handlers: db.NewScreener(a.store, nil).Handlers()}).RunOne(ctx, 0); !ok || err != nil {
		t.Fatalf("run the sweep: %v %v", ok, err)
	}
	pages = append(pages, p("threshold sweep", "/sweep", fmt.Sprintf("/sweep?run=%d", sweep)))
	// A recording from a file of several signals: the signals table and the
	// choice of lead.
	var shipped int64
	if err := a.store.Pool().QueryRow(ctx, `SELECT id FROM cases WHERE state IN ('recorder_sent', 'recording_received', 'over_read') ORDER BY id LIMIT 1`).Scan(&shipped); err != nil {
		t.Fatalf("no case taking recordings in the demo: %v", err)
	}
	edf, _ := threeSignalEDF(t)
	multi, err := a.store.AddRecording(ctx, a.users[cohort.Coordinator].Actor("127.0.0.1", "test"), shipped,
		ecg.RecordingInput{File: edf, FileName: "leads.edf", TakenAt: time.Now().Add(-time.Minute)})
	if err != nil {
		t.Fatal(err)
	}
	pages = append(pages, p("recording with several leads", "/recordings/{id}", fmt.Sprintf("/recordings/%d", multi.ID)))
	pages = append(pages, outreachPages(t, a)...)
	var imp int64
	if err := a.store.Pool().QueryRow(ctx, `SELECT id FROM imports ORDER BY id LIMIT 1`).Scan(&imp); err == nil {
		pages = append(pages, p("import report", "/imports/{id}", fmt.Sprintf("/imports/%d", imp)))
	}
	return pages
}

// a11yPage is one page to check: its name, its route pattern (for who may
// open it) and the address with real ids.
type a11yPage struct{ name, pattern, path string }

// TestAccessibilityOfMainPages runs axe-core in headless Chromium on every
// main page, as each role that may open it (the route table says which),
// on the sign-in, not-allowed and not-found pages, and on a few states a
// page reaches by use: a refused sign-in, a triage row after an action, an
// enrolment with refused fields, a sign-off refused for a missing box. The
// pages whose work is done in forms are also walked with Tab from top to
// bottom: every control a person can see must be reached, with its focus
// ringed clearly. Any violation of impact serious or
// critical fails, with the rule, its impact and the offending elements; the
// moderate and minor ones are logged. Every form control must have a label
// and an edge that can be seen, and every refusal must be tied to its field.
// Planted faults show the checker can fail, with the page's
// Content-Security-Policy still in force. The roles run side by side, each in its own
// browser.
func TestAccessibilityOfMainPages(t *testing.T) {
	src, err := os.ReadFile(axeScript)
	if err != nil {
		t.Fatalf("axe-core: %v (see testdata/axe/VERSION.md)", err)
	}
	a := newApp(t)
	pages := a11yFixture(t, a)
	var checked atomic.Int32
	// Pages walked with Tab from top to bottom: the ones whose work is
	// done in forms.
	tabWalked := map[string]bool{"case page": true, "recording page": true, "recording with several leads": true, "referral preview": true, "referral summary": true,
		"participant page": true, "new participant": true, "exports": true, "study settings": true, "account": true,
		"change password": true, "second factor set-up": true, "case page with a message": true, "message template": true}

	t.Run("visitor", func(t *testing.T) {
		t.Parallel()
		tb := newTab(t, a, 2*time.Minute)
		tb.preload(string(src))
		tb.open("/signin", "#email")
		tb.a11yCheck("a visitor", "sign-in")
		tb.tabWalk("a visitor", "sign-in")
		tb.b.Do("type a wrong password",
			chromedp.SendKeys(chromedp.ID("email"), "coordinator@example.org"),
			chromedp.SendKeys(chromedp.ID("password"), "not the password"),
		)
		tb.follow("submit a wrong password", `[data-testid="signin-submit"]`, `[data-testid="signin-error"]`)
		tb.a11yCheck("a visitor", "sign-in with its error")
		checked.Add(2)
		// The second step of a sign-in with a second factor, and its refusal.
		coded := codedAccount(t, a)
		tb.b.Do("sign in to an account with a second factor",
			chromedp.SetValue(chromedp.ID("email"), coded),
			chromedp.SetValue(chromedp.ID("password"), testPassword),
		)
		tb.follow("submit the password", `[data-testid="signin-submit"]`, `[data-testid="code-form"]`)
		tb.a11yCheck("a visitor", "sign-in code")
		tb.tabWalk("a visitor", "sign-in code")
		tb.b.Do("type a wrong code", chromedp.SendKeys(chromedp.ID("code"), "000000"))
		tb.follow("submit a wrong code", `[data-testid="code-form"] button`, `[data-testid="code-error"]`)
		tb.a11yCheck("a visitor", "sign-in code with its error")
		checked.Add(2)

		// The checker can fail: planted faults are found, with the
		// impact that fails the test, while the page's
		// Content-Security-Policy still refuses inline script.
		tb.eval(`(() => {
			const m = document.querySelector('main');
			m.insertAdjacentHTML('beforeend', '<img src="data:,"><button type="button"></button>');
			const s = document.createElement('script'); s.textContent = 'window.__inline = 1'; m.appendChild(s);
		})()`)
		found := map[string]string{}
		for _, v := range tb.axe() {
			found[v.ID] = v.Impact
		}
		for _, rule := range []string{"image-alt", "button-name"} {
			if found[rule] != "critical" {
				t.Errorf("a planted %s fault was reported as %q, want critical (found %v)", rule, found[rule], found)
			}
		}
		if tb.eval(`typeof window.__inline`) != "undefined" {
			t.Error("an inline script ran: the page under test is not under its Content-Security-Policy")
		}
	})
	for _, role := range cohort.Roles {
		t.Run(string(role), func(t *testing.T) {
			t.Parallel()
			tb := newTab(t, a, 6*time.Minute)
			tb.preload(string(src))
			tb.signIn(role)
			who := string(role)
			forbidden := false
			for _, pg := range pages {
				acc, ok := a.srv.accessOf("GET", pg.pattern)
				if !ok {
					t.Fatalf("%s: no route %s", pg.name, pg.pattern)
				}
				if !acc.allows(role) {
					if !forbidden {
						forbidden = true
						tb.open(pg.path, "main")
						tb.a11yCheck(who, "not-allowed page ("+pg.path+")")
						checked.Add(1)
					}
					continue
				}
				tb.open(pg.path, "main")
				if st := tb.status(); st != 200 {
					t.Errorf("%s as %s: status %d", pg.path, role, st)
					continue
				}
				tb.a11yCheck(who, pg.name)
				checked.Add(1)
				if tabWalked[pg.name] {
					tb.open(pg.path, "main") // from the top, as a person arrives
					tb.tabWalk(who, pg.name)
				}
				switch {
				case role == cohort.Coordinator && pg.name == "triage":
					tb.b.Do("take a case on triage",
						chromedp.Click(chromedp.CSS(`[data-testid="take"] button`)),
						chromedp.WaitVisible(chromedp.CSS(`[data-testid="row-done"]`)),
					)
					tb.a11yCheck(who, "triage after a row action")
					checked.Add(1)
				case role == cohort.Coordinator && pg.name == "new participant":
					// The form leaves checking to the server (novalidate):
					// sent empty, it comes back with a message per field.
					tb.follow("enrol nobody", `[data-testid="participant-form"] button[type="submit"]`, `.field-error`)
					if st := tb.status(); st != 422 {
						t.Errorf("an empty enrolment answers %d, want 422", st)
					}
					tb.a11yCheck(who, "new participant with refused fields")
					checked.Add(1)
				case role == cohort.Investigator && pg.name == "referral summary":
					// The box is required in the browser; without that the
					// server refuses, and the page shows why.
					tb.eval(`document.querySelector('[data-testid="form-signoff"] input[name="reviewed"]').required = false`)
					tb.follow("sign off without the review box", `[data-testid="sign-off"]`, `[data-testid="error-reviewed"]`)
					tb.a11yCheck(who, "referral summary with a refused sign-off")
					checked.Add(1)
				}
			}
			tb.open("/no-such-page", "main")
			tb.a11yCheck(who, "not-found page")
			checked.Add(1)
		})
	}
	t.Cleanup(func() { t.Logf("axe-core ran on %d page views", checked.Load()) })
}

// preload has the browser run src in every page it opens from now on,
// before the page's own scripts, through the DevTools protocol
// (Page.addScriptToEvaluateOnNewDocument), which the page's
// Content-Security-Policy does not govern: the policy stays as served.
func (tb *tab) preload(src string) {
	tb.t.Helper()
	err := chromedp.Do(tb.b.Context(), chromedp.Func(func(ctx context.Context, t *chromedp.Target) error {
		_, err := cdp.Call(ctx, t, page.AddScriptToEvaluateOnNewDocument, page.AddScriptToEvaluateOnNewDocumentParams{Source: src})
		return err
	}))
	if err != nil {
		tb.t.Fatalf("preload axe-core: %v", err)
	}
}

// a11yCheck runs axe-core and the label and control-edge checks on the
// page shown and reports what fails.
func (tb *tab) a11yCheck(who, name string) {
	t := tb.t
	t.Helper()
	for _, v := range tb.axe() {
		if v.Impact == "serious" || v.Impact == "critical" {
			t.Errorf("%s, as %s: %s", name, who, v)
		} else {
			t.Logf("%s, as %s (not failing): %s", name, who, v)
		}
	}
	if bad := tb.eval(unlabelled); bad != "[]" && bad != "" {
		t.Errorf("%s, as %s: form controls without a label: %s", name, who, bad)
	}
	if bad := tb.eval(a11yKit + `.unlinkedErrors()`); bad != "[]" && bad != "" {
		t.Errorf("%s, as %s: refusals not tied to their fields: %s", name, who, bad)
	}
	if bad := tb.eval(a11yKit + `.faintControls()`); bad != "[]" && bad != "" {
		t.Errorf("%s, as %s: form controls whose edge is too faint to find (WCAG 1.4.11 asks 3:1): %s", name, who, bad)
	}
}

// focusStop is where one Tab left the focus, and how the focus shows.
type focusStop struct {
	Key      string    `json:"key"`
	Body     bool      `json:"body"`  // nothing focused
	Inner    bool      `json:"inner"` // the focus is inside the browser's own parts of a field (a date field's picker button)
	What     string    `json:"what"`
	ID       string    `json:"id"`
	Tag      string    `json:"tag"`
	Row      string    `json:"row"`
	Form     string    `json:"form"`
	Outline  float64   `json:"outline"`
	Sides    []float64 `json:"sides"`
	OnScreen bool      `json:"onScreen"`
}

// press sends one key to the page and reports where the focus is then.
func (tb *tab) press(key string) focusStop {
	tb.t.Helper()
	tb.b.Do("press "+strconv.Quote(key), chromedp.KeyEvent(key))
	got, err := chromedp.Run(tb.b.Context(), chromedp.Evaluate[focusStop](a11yKit+`.focused()`))
	if err != nil {
		tb.t.Fatalf("focused element: %v", err)
	}
	return got
}

// ringed fails the test when the focused element does not show its focus
// clearly: an outline of at least 2 px, on screen, contrasting 3:1 with the
// colour beside it. The ring may meet a neighbouring control on one side (a
// dark button beside a select); on the other sides it must stand out.
//
// Focus inside the browser's own parts of a field, such as a date field's
// picker button, is drawn by the browser and out of the page's reach
// (WCAG 1.4.11 exempts what the user agent draws); it is not checked.
func (tb *tab) ringed(s focusStop) {
	tb.t.Helper()
	if s.Inner {
		return
	}
	short := 0
	for _, c := range s.Sides {
		if c < 3 {
			short++
		}
	}
	if s.Outline < 2 || len(s.Sides) < 2 || short > 1 || !s.OnScreen {
		tb.t.Errorf("%s has focus but shows it poorly: outline %.1f px, contrast with the colour beside it %v (:1), on screen %v", s.What, s.Outline, s.Sides, s.OnScreen)
	}
}

// tabWalk tabs through the page shown from its start until the focus
// leaves the page or comes round again, and fails for every control a
// person can see that Tab never reaches, and for every stop whose focus
// does not show.
func (tb *tab) tabWalk(who, name string) {
	t := tb.t
	t.Helper()
	want, err := chromedp.Run(tb.b.Context(), chromedp.Evaluate[map[string]string](a11yKit+`.controls()`))
	if err != nil {
		t.Fatalf("controls of %s: %v", name, err)
	}
	if len(want) == 0 {
		t.Fatalf("%s, as %s: no control to walk to; is the page there?", name, who)
	}
	reached := map[string]bool{}
	first := ""
	// A field the page focuses itself (autofocus) is where a person starts.
	if s, err := chromedp.Run(tb.b.Context(), chromedp.Evaluate[focusStop](a11yKit+`.focused()`)); err != nil {
		t.Fatalf("focused element: %v", err)
	} else if !s.Body {
		first, reached[s.Key] = s.Key, true
	}
	for i := 0; ; i++ {
		if i > 2*len(want)+20 {
			t.Errorf("%s, as %s: Tab went round %d times without leaving the page", name, who, i)
			break
		}
		s := tb.press(kb.Tab)
		if s.Body || s.Key == first {
			if len(reached) > 0 {
				break
			}
			continue
		}
		if first == "" {
			first = s.Key
		}
		reached[s.Key] = true
		tb.ringed(s)
	}
	var missed []string
	for k, what := range want {
		if !reached[k] {
			missed = append(missed, what)
		}
	}
	slices.Sort(missed)
	if len(missed) > 0 {
		t.Errorf("%s, as %s: Tab never reaches %d of %d controls: %v", name, who, len(missed), len(want), missed)
	}
}

// TestKeyboardWorksTriage uses the triage page with the keyboard alone, as
// the brief of the page promises: the first Tab reaches the skip link,
// which shows and moves the focus to the main content; Tab then reaches
// every action of a row in reading order (the study ID link, take, assign,
// the attempt's channel and outcome, log); Enter takes the case and the
// focus stays in its row; a letter picks the outcome and Enter logs the
// attempt. Every stop on the way carries a focus ring that contrasts 3:1
// with the colour beside it, the header's too.
func TestKeyboardWorksTriage(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 2)
	tb := newTab(t, a, 90*time.Second)
	row := fmt.Sprintf("case-%d", ids[0])
	tb.signIn(cohort.Coordinator)
	tb.open("/triage", "#"+row)

	press, ringed := tb.press, tb.ringed

	// The header: skip link, home link, one's account, sign out.
	first := press(kb.Tab)
	if !strings.Contains(first.What, ".skip") {
		t.Fatalf("the first Tab reaches %s, want the skip link", first.What)
	}
	ringed(first)
	for _, want := range []string{"a.mark", `a[data-testid=user-name]`, `button[data-testid=sign-out]`} {
		s := press(kb.Tab)
		if !strings.HasPrefix(s.What, want) {
			t.Fatalf("Tab reaches %s, want %s", s.What, want)
		}
		ringed(s)
	}

	// The skip link moves past the header and the navigation.
	tb.open("/triage", "#"+row)
	press(kb.Tab)
	if s := press(kb.Enter); s.ID != "main" || !strings.HasSuffix(tb.b.Location(), "#main") {
		t.Fatalf("Enter on the skip link leaves the focus on %s at %s, want main", s.What, tb.b.Location())
	}

	// Tab through the content up to the first row's last action.
	var inRow []string
	var takeAt int
	for i := 1; ; i++ {
		if i > 150 {
			t.Fatalf("150 Tabs did not reach the row's attempt form; reached in the row: %v", inRow)
		}
		s := press(kb.Tab)
		ringed(s)
		if s.Row != row {
			continue
		}
		inRow = append(inRow, s.Form+" "+s.Tag)
		if s.Form == "take" {
			takeAt = i
		}
		if s.Form == "attempt" && s.Tag == "button" {
			break
		}
	}
	// The study ID, the contact details (issue 19), then the forms.
	want := []string{" a", " a", "take button", "assign-to select", "assign-to button", "attempt select", "attempt select", "attempt button"}
	if !slices.Equal(inRow, want) {
		t.Errorf("Tab order in the row %q, want %q", inRow, want)
	}

	// Work the row: take it, then log a call that reached the participant.
	tb.open("/triage", "#"+row)
	press(kb.Tab)
	press(kb.Enter)
	for range takeAt {
		press(kb.Tab)
	}
	tb.b.Do("take the case with Enter", chromedp.KeyEvent(kb.Enter), chromedp.WaitVisible(chromedp.CSS("#"+row+` [data-testid="row-done"]`)))
	if got := tb.b.Text("owner", "#"+row+` [data-testid="row-owner"]`); got != "Test Coordinator" {
		t.Errorf("owner after Enter on take: %q", got)
	}
	s := focusStop{}
	for range 10 {
		if s = press(kb.Tab); s.ID == fmt.Sprintf("outcome-%d", ids[0]) {
			break
		}
	}
	if s.Row != row || s.Tag != "select" {
		t.Fatalf("after taking the case Tab reaches %s in %q, want the outcome of %s", s.What, s.Row, row)
	}
	press("r") // the first outcome starting with r: reached
	if s := press(kb.Tab); s.Form != "attempt" || s.Tag != "button" {
		t.Fatalf("Tab after the outcome reaches %s", s.What)
	}
	tb.b.Do("log the attempt with Enter", chromedp.KeyEvent(kb.Enter), chromedp.WaitVisible(chromedp.CSS("#"+row+` [data-testid="ship"]`)))
	if got := tb.b.Text("state", "#"+row+` [data-testid="row-state"]`); got != "reached" {
		t.Errorf("state after the keyboard attempt %q, want reached", got)
	}
}

// codedAccount adds a monitor account with a second factor set up and
// returns its e-mail address.
func codedAccount(t *testing.T, a *app) string {
	t.Helper()
	ctx := context.Background()
	hash, err := credential.Hash(testPassword, credential.TestParams)
	if err != nil {
		t.Fatal(err)
	}
	u, err := a.store.CreateUser(ctx, cohort.System, db.NewUser{Email: "coded@example.org", Name: "Test Coded", Role: cohort.Monitor, PasswordHash: hash})
	if err != nil {
		t.Fatal(err)
	}
	sealed, err := credential.Seal(credential.SealKey([]byte(testSecret)), credential.NewTOTPSecret(), sealContext(u.ID))
	if err != nil {
		t.Fatal(err)
	}
	if err := a.store.EnableSecondFactor(ctx, u.Actor("", ""), sealed, 0, nil); err != nil {
		t.Fatal(err)
	}
	return u.Email
}

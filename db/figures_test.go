package db_test

import (
	"context"
	"fmt"
	"math"
	"slices"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/stats"
	"cohortdesk/db"
)

// figureCohort builds a small study whose every count is worked out by hand:
//
//	P1..P16 enrolled, odd numbers at site AA, even at BB.
//	P16 has no screening result (no wear data); P15 only a negative week.
//	P1..P14 are screen-positive in week 2 and get a case each, flagged on day 0
//	(2026-06-01).
//	P13 is being contacted (no answer); P14 closed unreachable on day 2.
//	P1..P12 are reached and sent a recorder on day 1.
//	P1..P11 return a 45 s recording taken on day 2.
//	P1..P10 get one over-read on day 2+i (i = 1..10, so days 3..12):
//	  P1..P7 AF, P8 and P9 sinus rhythm, P10 atrial flutter.
//	P11's recording is read as uninterpretable on day 5.
//	P1 and P2 are referred.
//	Recorder's own readings: P1..P5 suggest AF, P6 a regular rhythm, P7
//	none, P8 a regular rhythm, P9 AF, P10 no rhythm call, P11 not analysed.
//
// The figures are read as of day 30.
func figureCohort(t *testing.T) (*caseFixture, map[string]int64) {
	t.Helper()
	f := newCaseFixture(t, 16)
	ctx := context.Background()
	for i := 1; i <= 14; i++ {
		f.positive(f.proto, fmt.Sprintf("P%d", i), 2)
	}
	mustExec(t, f.s, `INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
		VALUES ($1, $2, 1, 'negative', 'regular', '{}', 'd', 120)`, f.pids["P15"], f.proto)
	f.sync()
	cases := map[string]int64{}
	for i := 1; i <= 14; i++ {
		sid := fmt.Sprintf("P%d", i)
		cases[sid] = f.caseID(sid)
	}
	day := func(n int) time.Time { return fixedNow.AddDate(0, 0, n) }
	f.clock.set(day(1))
	for i := 1; i <= 12; i++ {
		f.toRecorderSent(fmt.Sprintf("P%d", i))
	}
	for _, sid := range []string{"P13", "P14"} {
		if _, err := f.s.LogAttempt(ctx, f.coord, cases[sid], db.AttemptInput{Version: f.get(cases[sid]).Version, Channel: "phone", Outcome: "no_answer"}); err != nil {
			t.Fatal(err)
		}
	}
	f.clock.set(day(2))
	if _, err := f.s.CloseCase(ctx, f.coord, cases["P14"], db.MoveInput{Version: f.get(cases["P14"]).Version, To: "closed_unreachable", Reason: "no answer to five attempts"}); err != nil {
		t.Fatal(err)
	}
	autos := []overread.Auto{"", "suggests_af", "suggests_af", "suggests_af", "suggests_af", "suggests_af", "suggests_regular", "no_reading", "suggests_regular", "suggests_af", "no_call", "not_analysed"}
	rhythms := []overread.Rhythm{"", "af", "af", "af", "af", "af", "af", "af", "sinus", "sinus", "flutter"}
	recs := map[string]int64{}
	for i := 1; i <= 11; i++ {
		sid := fmt.Sprintf("P%d", i)
		r, err := f.s.AddRecording(ctx, f.coord, cases[sid], ecg.RecordingInput{TakenAt: day(2).Add(-time.Hour), DurationS: 45, Auto: autos[i]})
		if err != nil {
			t.Fatal(err)
		}
		recs[sid] = r.ID
	}
	f.clock.set(day(30))
	for i := 1; i <= 10; i++ {
		sid := fmt.Sprintf("P%d", i)
		in := db.OverReadInput{Rhythm: rhythms[i], Confidence: "certain", ReaderID: f.inv.UserID, ReadOn: cohort.DateOf(day(2 + i))}
		if _, err := f.s.AddOverRead(ctx, f.inv, recs[sid], in); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := f.s.AddOverRead(ctx, f.inv, recs["P11"], db.OverReadInput{Rhythm: "uninterpretable", Confidence: "certain", ReaderID: f.inv.UserID, ReadOn: cohort.DateOf(day(5))}); err != nil {
		t.Fatal(err)
	}
	for _, sid := range []string{"P1", "P2"} {
		if _, err := f.s.AdvanceCase(ctx, f.coord, cases[sid], "referred", time.Time{}, "summary sent"); err != nil {
			t.Fatal(err)
		}
	}
	return f, cases
}

func (f *caseFixture) ids(sids ...string) []int64 {
	out := make([]int64, len(sids))
	for i, s := range sids {
		out[i] = f.pids[s]
	}
	slices.Sort(out)
	return out
}

// boxMembers pages through the members of a box of c (or of one exit), three
// at a time, so the keyset paging is part of what is checked.
func boxMembers(t *testing.T, s *db.Store, c cascade.Cascade, box int, exit cascade.ExitReason) []int64 {
	t.Helper()
	var out []int64
	var after int64
	for {
		page, err := s.CascadeMembersAfter(context.Background(), c.Filter, box, exit, after, 3)
		if err != nil {
			t.Fatal(err)
		}
		for _, m := range page.Members {
			out = append(out, m.ID)
			if exit != "" && (m.Standing.Box != box || m.Standing.Exit != exit) {
				t.Errorf("box %d exit %s lists participant %d standing %+v", box, exit, m.ID, m.Standing)
			}
		}
		if page.Next == 0 {
			return out
		}
		after = page.Next
	}
}

func seq(from, to int) []string {
	var out []string
	for i := from; i <= to; i++ {
		out = append(out, fmt.Sprintf("P%d", i))
	}
	return out
}

// TestCascadeOnAHandWorkedCohort checks every box and exit of figureCohort
// against the counts worked out in its comment, and that each box holds the
// next plus its exits.
func TestCascadeOnAHandWorkedCohort(t *testing.T) {
	f, cases := figureCohort(t)
	c, err := f.s.Cascade(context.Background(), cascade.Filter{})
	if err != nil {
		t.Fatal(err)
	}
	want := []struct {
		key   string
		who   []string
		cases int
		exits map[cascade.ExitReason][]string
	}{
		{"enrolled", seq(1, 16), 0, map[cascade.ExitReason][]string{cascade.ExitNoWearData: {"P16"}}},
		{"sufficient_wear", seq(1, 15), 0, map[cascade.ExitReason][]string{cascade.ExitScreenNegative: {"P15"}}},
		{"screen_positive", seq(1, 14), 14, map[cascade.ExitReason][]string{cascade.ExitContacting: {"P13"}, cascade.ExitUnreachable: {"P14"}}},
		{"reached", seq(1, 12), 12, map[cascade.ExitReason][]string{cascade.ExitAwaitingRecording: {"P12"}}},
		{"recording_returned", seq(1, 11), 11, map[cascade.ExitReason][]string{cascade.ExitUninterpretable: {"P11"}}},
		{"over_read", seq(1, 10), 10, map[cascade.ExitReason][]string{cascade.ExitNotAFSinus: {"P8", "P9"}, cascade.ExitNotAFFlutter: {"P10"}}},
		{"af_confirmed", seq(1, 7), 7, map[cascade.ExitReason][]string{cascade.ExitReferralPending: seq(3, 7)}},
		{"referred", seq(1, 2), 2, nil},
	}
	if len(c.Boxes) != len(want) {
		t.Fatalf("%d boxes", len(c.Boxes))
	}
	for i, w := range want {
		b := c.Boxes[i]
		if b.Key != w.key || b.Count() != len(w.who) || !slices.Equal(boxMembers(t, f.s, c, i, ""), f.ids(w.who...)) || b.CaseN != w.cases {
			t.Errorf("box %d %s: %d participants, %d cases; want %s %d participants, %d cases", i, b.Key, b.Count(), b.CaseN, w.key, len(w.who), w.cases)
		}
		got := map[cascade.ExitReason][]int64{}
		sum := 0
		for _, e := range b.Exits {
			got[e.Reason] = boxMembers(t, f.s, c, i, e.Reason)
			if len(got[e.Reason]) != e.N {
				t.Errorf("%s exit %s counts %d, lists %d", b.Key, e.Reason, e.N, len(got[e.Reason]))
			}
			sum += e.N
		}
		if len(got) != len(w.exits) {
			t.Errorf("%s exits %v, want %v", b.Key, got, w.exits)
		}
		for r, who := range w.exits {
			if !slices.Equal(got[r], f.ids(who...)) {
				t.Errorf("%s exit %s: %v, want %v", b.Key, r, got[r], f.ids(who...))
			}
		}
		if i+1 < len(c.Boxes) && b.Count() != c.Boxes[i+1].Count()+sum {
			t.Errorf("%s: %d is not %d in the next box plus %d exits", b.Key, b.Count(), c.Boxes[i+1].Count(), sum)
		}
	}
	referred, err := f.s.CascadeMembersAfter(context.Background(), c.Filter, len(c.Boxes)-1, "", 0, 10)
	if err != nil {
		t.Fatal(err)
	}
	var got []int64
	for _, m := range referred.Members {
		for _, k := range m.Cases {
			got = append(got, k.ID)
		}
	}
	slices.Sort(got)
	if !slices.Equal(got, []int64{min(cases["P1"], cases["P2"]), max(cases["P1"], cases["P2"])}) {
		t.Errorf("referred cases %v", got)
	}
	// Site BB holds the even participants: P2..P16, 8 enrolled, 7 flagged.
	bb, err := f.s.Cascade(context.Background(), cascade.Filter{SiteID: 2})
	if err != nil {
		t.Fatal(err)
	}
	if bb.Box("enrolled").Count() != 8 || bb.Box("screen_positive").Count() != 7 || bb.Box("af_confirmed").Count() != 3 {
		t.Errorf("site BB: %d enrolled, %d flagged, %d confirmed", bb.Box("enrolled").Count(), bb.Box("screen_positive").Count(), bb.Box("af_confirmed").Count())
	}
	// Everyone enrolled on 2026-01-05: a window ending that day is empty.
	none, err := f.s.Cascade(context.Background(), cascade.Filter{To: time.Date(2026, 1, 5, 0, 0, 0, 0, time.UTC)})
	if err != nil || none.Box("enrolled").Count() != 0 {
		t.Errorf("empty window: %d enrolled, %v", none.Box("enrolled").Count(), err)
	}
	if _, err := f.s.Cascade(context.Background(), cascade.Filter{ProtocolID: 999}); err == nil {
		t.Error("unknown protocol accepted")
	}
}

// TestAgreementOnAHandWorkedCohort checks the statistics wiring on
// figureCohort: counts by hand, intervals and kappa from cohort/stats (whose
// own tests check them against Newcombe 1998 and published kappa examples).
func TestAgreementOnAHandWorkedCohort(t *testing.T) {
	f, _ := figureCohort(t)
	ctx := context.Background()
	a, err := f.s.Agreement(ctx, cascade.Filter{})
	if err != nil {
		t.Fatal(err)
	}
	all := a.Groups[0]
	// 14 flagged, 11 with a recording, 10 over-read, 7 AF: PPV 7/10.
	if all.Dimension != "all" || all.Flagged != 14 || all.WithRecording != 11 || all.OverRead != 10 || all.Confirmed != 7 {
		t.Fatalf("all: %+v", all)
	}
	if all.PPV != (stats.Fraction{X: 7, N: 10}) || all.PPV.Value() != 0.7 {
		t.Errorf("PPV %v", all.PPV)
	}
	wilson, _ := stats.ProportionCI(7, 10, 0.95, stats.Wilson)
	exact, _ := stats.ProportionCI(7, 10, 0.95, stats.ClopperPearson)
	if all.Wilson != wilson || all.Exact != exact {
		t.Errorf("intervals %v %v, want %v %v", all.Wilson, all.Exact, wilson, exact)
	}
	// Wilson 7/10 by hand (computed): centre (0.7 + z^2/20)/(1 + z^2/10) =
	// 0.64450, half-width z*sqrt(0.021 + z^2/400)/(1 + z^2/10) = 0.24771 with
	// z = 1.959964, so 0.3968-0.8922.
	if math.Abs(all.Wilson.Lo-0.3968) > 5e-5 || math.Abs(all.Wilson.Hi-0.8922) > 5e-5 {
		t.Errorf("Wilson 7/10 %v, want 0.3968-0.8922", all.Wilson)
	}
	// 11 episodes have a settled reading; P11's is only uninterpretable.
	if all.Uninterpretable != (stats.Fraction{X: 1, N: 11}) {
		t.Errorf("uninterpretable %v, want 1/11", all.Uninterpretable)
	}
	// Time to over-read: events on days 3..12, P14 censored on day 2, P11..P13
	// on day 30. After day 2, 13 at risk; S after k events is (13-k)/13, first
	// at or below 0.5 at k = 7 (6/13), on day 9 (computed by hand).
	if !all.Median.Reached || all.Median.Time != 9 || all.Events != 10 || all.Censored != 4 {
		t.Errorf("median %+v, %d events, %d censored", all.Median, all.Events, all.Censored)
	}
	if len(a.Curve.Steps) == 0 || a.Curve.N != 14 {
		t.Errorf("curve of %d", a.Curve.N)
	}
	// By site: AA (odd) 7 flagged, 5 over-read, 4 AF; BB 7, 5, 3.
	sites := map[string]cascade.Group{}
	for _, g := range a.Groups {
		if g.Dimension == "site" {
			sites[g.Label] = g
		}
	}
	if g := sites["AA"]; g.Flagged != 7 || g.OverRead != 5 || g.Confirmed != 4 {
		t.Errorf("AA %+v", g)
	}
	if g := sites["BB"]; g.Flagged != 7 || g.OverRead != 5 || g.Confirmed != 3 {
		t.Errorf("BB %+v", g)
	}
	if len(a.ByVersion) != 1 || a.ByVersion[0].Flagged != 14 || a.ByVersion[0].PPV != all.PPV {
		t.Errorf("by version %+v", a.ByVersion)
	}
	// Kappa, rows the recorder, columns over-read (AF, regular, other, not analysable):
	// AF row P1..P5 -> AF, P9 -> sinus; regular row P6 -> AF, P8 -> sinus;
	// no call P10 -> flutter (other); not analysed P11 -> uninterpretable;
	// P7 has none and is left out. po = 8/10, pe = (36+4+1+1)/100 = 0.42,
	// kappa = 0.38/0.58 = 0.6552 (computed by hand).
	wantTable := [][]int{{5, 1, 0, 0}, {1, 1, 0, 0}, {0, 0, 1, 0}, {0, 0, 0, 1}}
	if a.Kappa.N != 10 || fmt.Sprint(a.Kappa.Table) != fmt.Sprint(wantTable) {
		t.Fatalf("kappa table %v (n %d)", a.Kappa.Table, a.Kappa.N)
	}
	k, _ := stats.CohenKappa(wantTable)
	if a.Kappa.Kappa != k || math.Abs(k.Kappa-0.38/0.58) > 1e-12 || math.Abs(k.Po-0.8) > 1e-12 || math.Abs(k.Pe-0.42) > 1e-12 {
		t.Errorf("kappa %+v, want %+v", a.Kappa.Kappa, k)
	}
	// The statistics and the cascade count the same cases.
	c, err := f.s.Cascade(ctx, cascade.Filter{})
	if err != nil {
		t.Fatal(err)
	}
	for key, n := range map[string]int{"screen_positive": all.Flagged, "recording_returned": all.WithRecording, "over_read": all.OverRead, "af_confirmed": all.Confirmed} {
		if got := c.Box(key).CaseN; got != n {
			t.Errorf("cascade %s has %d cases, statistics %d", key, got, n)
		}
	}
}

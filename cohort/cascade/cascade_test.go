package cascade

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/stats"
)

// day0 is the day every case of handWorked is flagged.
var day0 = time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)

func day(n int) time.Time { return day0.AddDate(0, 0, n) }

// settled is a recording's conclusion from one reading on day n.
func settled(r overread.Rhythm, n int) overread.Conclusion {
	return overread.Conclusion{Status: overread.Single, Final: true, Rhythm: r, SettledOn: cohort.DateOf(day(n))}
}

// handWorked is the cohort of db's figure test (figureCohort) as rows, with
// every count worked out by hand:
//
//	P1..P16 enrolled (id i is Pi), odd numbers at site AA, even at BB;
//	P1..P8 female, P9..P16 male; P1..P5 aged 55, P6..P14 aged 72, P15 and
//	P16 without a recorded age.
//	P16 has no screening result (no wear data); P15 only a negative week.
//	P1..P14 are screen-positive and get a case each (case 100+i), flagged on
//	day 0 (2026-06-01).
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
func handWorked() Rows {
	v1 := ProtocolRef{ID: 1, Name: "default", Version: 1, Active: true}
	rs := Rows{Protocol: v1, Versions: []ProtocolRef{v1}, Loc: time.UTC, AsOf: cohort.DateOf(day(30))}
	for i := 1; i <= 16; i++ {
		p := Person{ID: int64(i), Site: "BB", Sex: cohort.Male, Sufficient: i <= 15, Positive: i <= 14}
		if i%2 == 1 {
			p.Site = "AA"
		}
		if i <= 8 {
			p.Sex = cohort.Female
		}
		switch {
		case i <= 5:
			p.Age = new(55)
		case i <= 14:
			p.Age = new(72)
		}
		rs.People = append(rs.People, p)
	}
	autos := []overread.Auto{"", "suggests_af", "suggests_af", "suggests_af", "suggests_af", "suggests_af", "suggests_regular", "no_reading", "suggests_regular", "suggests_af", "no_call", "not_analysed"}
	rhythms := []overread.Rhythm{"", "af", "af", "af", "af", "af", "af", "af", "sinus", "sinus", "flutter"}
	for i := 1; i <= 14; i++ {
		e := Episode{CaseID: int64(100 + i), ParticipantID: int64(i), ProtocolID: 1, Flagged: day0}
		switch {
		case i == 13:
			e.State = followup.Contacting
		case i == 14:
			e.State, e.ClosedAt = followup.ClosedUnreachable, day(2)
		case i == 12:
			e.State, e.ReachedAt = followup.RecorderSent, day(1)
		case i == 11:
			e.State, e.ReachedAt = followup.RecordingReceived, day(1)
		case i <= 2:
			e.State, e.ReachedAt = followup.Referred, day(1)
		default:
			e.State, e.ReachedAt = followup.OverRead, day(1)
		}
		if i <= 11 {
			rec := Recording{ID: int64(200 + i), Auto: autos[i]}
			switch {
			case i <= 10:
				rec.Conclusion = settled(rhythms[i], 2+i)
			default:
				rec.Conclusion = settled(overread.Uninterpretable, 5)
			}
			e.Recordings = []Recording{rec}
		}
		rs.Episodes = append(rs.Episodes, e)
	}
	return rs
}

func ids(from, to int) []int64 {
	var out []int64
	for i := from; i <= to; i++ {
		out = append(out, int64(i))
	}
	return out
}

// TestCascadeOnAHandWorkedCohort checks every box and exit of handWorked
// against the counts worked out in its comment, and that each box holds the
// next plus its exits.
func TestCascadeOnAHandWorkedCohort(t *testing.T) {
	rs := handWorked()
	c := rs.Cascade(Filter{})
	want := []struct {
		key   string
		who   []int64
		cases int
		exits map[ExitReason][]int64
	}{
		{"enrolled", ids(1, 16), 0, map[ExitReason][]int64{ExitNoWearData: {16}}},
		{"sufficient_wear", ids(1, 15), 0, map[ExitReason][]int64{ExitScreenNegative: {15}}},
		{"screen_positive", ids(1, 14), 14, map[ExitReason][]int64{ExitContacting: {13}, ExitUnreachable: {14}}},
		{"reached", ids(1, 12), 12, map[ExitReason][]int64{ExitAwaitingRecording: {12}}},
		{"recording_returned", ids(1, 11), 11, map[ExitReason][]int64{ExitUninterpretable: {11}}},
		{"over_read", ids(1, 10), 10, map[ExitReason][]int64{ExitNotAFSinus: {8, 9}, ExitNotAFFlutter: {10}}},
		{"af_confirmed", ids(1, 7), 7, map[ExitReason][]int64{ExitReferralPending: ids(3, 7)}},
		{"referred", ids(1, 2), 2, nil},
	}
	if len(c.Boxes) != len(want) {
		t.Fatalf("%d boxes", len(c.Boxes))
	}
	for i, w := range want {
		b := c.Boxes[i]
		if b.Key != w.key || !slices.Equal(b.Participants, w.who) || len(b.Cases) != w.cases {
			t.Errorf("box %d %s: %d participants, %d cases; want %s %d participants, %d cases", i, b.Key, b.Count(), len(b.Cases), w.key, len(w.who), w.cases)
		}
		got := map[ExitReason][]int64{}
		sum := 0
		for _, e := range b.Exits {
			got[e.Reason] = e.Participants
			sum += len(e.Participants)
		}
		if len(got) != len(w.exits) {
			t.Errorf("%s exits %v, want %v", b.Key, got, w.exits)
		}
		for r, who := range w.exits {
			if !slices.Equal(got[r], who) {
				t.Errorf("%s exit %s: %v, want %v", b.Key, r, got[r], who)
			}
		}
		if i+1 < len(c.Boxes) && b.Count() != c.Boxes[i+1].Count()+sum {
			t.Errorf("%s: %d is not %d in the next box plus %d exits", b.Key, b.Count(), c.Boxes[i+1].Count(), sum)
		}
	}
	if got := c.Box("referred").Cases; !slices.Equal(got, []int64{101, 102}) {
		t.Errorf("referred cases %v", got)
	}
	// The largest exit comes first: sinus (2) before flutter (1).
	if ex := c.Box("over_read").Exits; ex[0].Reason != ExitNotAFSinus {
		t.Errorf("over_read exits in order %v", ex)
	}
	if c.Filter.ProtocolID != 1 || c.Protocol.Label() != "default v1" {
		t.Errorf("filter %+v, protocol %q", c.Filter, c.Protocol.Label())
	}
}

// TestCascadeFollowsTheChosenVersion: cases of another protocol version do
// not count, and a participant with two cases counts once, by the case that
// went furthest.
func TestCascadeFollowsTheChosenVersion(t *testing.T) {
	rs := handWorked()
	// P13 gets a second case of version 1, flagged later, that reached
	// "referred" with AF; P15 a case of version 2 only.
	rs.Episodes = append(rs.Episodes,
		Episode{CaseID: 150, ParticipantID: 13, ProtocolID: 1, State: followup.Referred, Flagged: day(20), ReachedAt: day(20),
			Recordings: []Recording{{ID: 300, Auto: overread.AutoSuggestsAF, Conclusion: settled(overread.AF, 25)}}},
		Episode{CaseID: 151, ParticipantID: 15, ProtocolID: 2, State: followup.Contacting, Flagged: day(20)})
	c := rs.Cascade(Filter{})
	if got := c.Box("referred").Participants; !slices.Equal(got, []int64{1, 2, 13}) {
		t.Errorf("referred %v, want P1, P2 and P13", got)
	}
	if got := c.Box("screen_positive"); got.Count() != 14 || len(got.Cases) != 15 {
		t.Errorf("screen_positive: %d participants, %d cases; want 14 and 15", got.Count(), len(got.Cases))
	}
	for _, e := range c.Box("screen_positive").Exits {
		if slices.Contains(e.Participants, 13) {
			t.Errorf("P13 still leaves at screen_positive (%s)", e.Reason)
		}
	}
	if got := c.Box("sufficient_wear").Exits; len(got) != 1 || !slices.Equal(got[0].Participants, []int64{15}) {
		t.Errorf("version 2's case moved P15 on: %v", got)
	}
}

// TestEpisodeStageAndExit: each way a case can stop, the stage it reached
// and the reason it gives, as the Cascade doc comment defines them.
func TestEpisodeStageAndExit(t *testing.T) {
	read := func(r overread.Rhythm) Recording { return Recording{Conclusion: settled(r, 3)} }
	short := func(r overread.Rhythm) Recording { rec := read(r); rec.TooShort = true; return rec }
	unread := Recording{Conclusion: overread.Conclusion{Status: overread.Unread}}
	disagreed := Recording{Conclusion: overread.Conclusion{Status: overread.Disagreed}}
	cases := []struct {
		name  string
		state followup.State
		reach bool
		recs  []Recording
		stage Stage
		exit  ExitReason
	}{
		{"open", followup.Open, false, nil, StageFlagged, ExitContacting},
		{"declined before reached", followup.ClosedDeclined, false, nil, StageFlagged, ExitDeclined},
		{"withdrew before reached", followup.ClosedWithdrawn, false, nil, StageFlagged, ExitWithdrawn},
		{"state beyond reached counts as reached", followup.RecorderSent, false, nil, StageReached, ExitAwaitingRecording},
		{"reached, then declined", followup.ClosedDeclined, true, nil, StageReached, ExitDeclined},
		{"reached, closed another way", followup.ClosedNotConfirmed, true, nil, StageReached, ExitClosed},
		{"recording not read", followup.RecordingReceived, true, []Recording{unread}, StageRecording, ExitAwaitingOverRead},
		{"readers disagree", followup.RecordingReceived, true, []Recording{disagreed}, StageRecording, ExitDisagreement},
		{"disagreement beats unread", followup.RecordingReceived, true, []Recording{unread, disagreed}, StageRecording, ExitDisagreement},
		{"only short recordings, read as AF", followup.RecordingReceived, true, []Recording{short(overread.AF)}, StageRecording, ExitTooShort},
		{"uninterpretable, case closed", followup.ClosedNotConfirmed, true, []Recording{read(overread.Uninterpretable)}, StageRecording, ExitUninterpretable},
		{"uninterpretable, still open", followup.RecordingReceived, true, []Recording{read(overread.Uninterpretable)}, StageRecording, ExitUninterpretable},
		{"unread, case closed", followup.ClosedWithdrawn, true, []Recording{unread}, StageRecording, ExitWithdrawn},
		{"a recording is a reach", followup.Contacting, false, []Recording{unread}, StageRecording, ExitAwaitingOverRead},
		{"sinus", followup.OverRead, true, []Recording{read(overread.Sinus)}, StageOverRead, ExitNotAFSinus},
		{"other beats sinus", followup.OverRead, true, []Recording{read(overread.Sinus), read(overread.Other)}, StageOverRead, ExitNotAFOther},
		{"flutter beats other", followup.OverRead, true, []Recording{read(overread.Flutter), read(overread.Other)}, StageOverRead, ExitNotAFFlutter},
		{"a short AF recording does not confirm", followup.OverRead, true, []Recording{read(overread.Sinus), short(overread.AF)}, StageOverRead, ExitNotAFSinus},
		{"AF, referral pending", followup.OverRead, true, []Recording{read(overread.Sinus), read(overread.AF)}, StageConfirmed, ExitReferralPending},
		{"AF, closed without referral", followup.ClosedWithdrawn, true, []Recording{read(overread.AF)}, StageConfirmed, ExitWithdrawn},
		{"AF, referred", followup.Referred, true, []Recording{read(overread.AF)}, StageReferred, ""},
		{"referred without AF", followup.Referred, true, []Recording{read(overread.Sinus)}, StageOverRead, ExitNotAFSinus},
	}
	for _, c := range cases {
		e := Episode{State: c.state, Flagged: day0, Recordings: c.recs}
		if c.reach {
			e.ReachedAt = day(1)
		}
		if got := e.stage(); got != c.stage {
			t.Errorf("%s: stage %d, want %d", c.name, got, c.stage)
		}
		if got := e.exit(); got != c.exit {
			t.Errorf("%s: exit %q, want %q", c.name, got, c.exit)
		}
	}
}

func TestExitReasonWords(t *testing.T) {
	waits := 0
	for r, l := range exitLabels {
		if !r.Known() || r.Label() != l || l == "" {
			t.Errorf("%s: known %v, label %q", r, r.Known(), r.Label())
		}
		if r.InProgress() {
			waits++
		}
	}
	if len(exitLabels) != 18 || waits != 8 {
		t.Errorf("%d reasons, %d of them waits; want 18 and 8", len(exitLabels), waits)
	}
	if r := ExitReason("typo"); r.Known() || r.InProgress() || r.Label() != "typo" {
		t.Errorf("unknown reason: known %v, in progress %v, label %q", r.Known(), r.InProgress(), r.Label())
	}
}

func TestChooseProtocol(t *testing.T) {
	a := ProtocolRef{ID: 3, Name: "default", Version: 1}
	b := ProtocolRef{ID: 7, Name: "default", Version: 2, Active: true}
	c := ProtocolRef{ID: 9, Name: "strict", Version: 1}
	for _, x := range []struct {
		versions []ProtocolRef
		id       int
		want     ProtocolRef
	}{
		{[]ProtocolRef{a, b, c}, 0, b}, // the active one
		{[]ProtocolRef{a, b, c}, 3, a}, // as asked
		{[]ProtocolRef{a, c}, 0, c},    // none active: the newest
		{nil, 0, ProtocolRef{}},        // no protocol at all
	} {
		got, err := ChooseProtocol(x.versions, x.id)
		if err != nil || got != x.want {
			t.Errorf("ChooseProtocol(%v, %d) = %v, %v; want %v", x.versions, x.id, got, err, x.want)
		}
	}
	if _, err := ChooseProtocol([]ProtocolRef{a, b}, 99); !errors.Is(err, cohort.ErrNotFound) {
		t.Errorf("unknown version: %v", err)
	}
	if got := (ProtocolRef{}).Label(); got != "no protocol" {
		t.Errorf("zero label %q", got)
	}
}

// TestAgreementOnAHandWorkedCohort checks the statistics on handWorked:
// counts by hand, intervals and kappa from cohort/stats (whose own tests
// check them against Newcombe 1998 and published kappa examples).
func TestAgreementOnAHandWorkedCohort(t *testing.T) {
	rs := handWorked()
	a, err := rs.Agreement()
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
	// Wilson 7/10 by hand (computed): centre (0.7 + z^2/20)/(1 + z^2/10) =
	// 0.64450, half-width z*sqrt(0.021 + z^2/400)/(1 + z^2/10) = 0.24771 with
	// z = 1.959964, so 0.3968-0.8922.
	if math.Abs(all.Wilson.Lo-0.3968) > 5e-5 || math.Abs(all.Wilson.Hi-0.8922) > 5e-5 {
		t.Errorf("Wilson 7/10 %v, want 0.3968-0.8922", all.Wilson)
	}
	exact, _ := stats.ProportionCI(7, 10, 0.95, stats.ClopperPearson)
	if all.Exact != exact {
		t.Errorf("exact interval %v, want %v", all.Exact, exact)
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
	// Subgroups, by hand: site AA (odd) 7 flagged, 6 with a recording, 5
	// over-read, 4 AF; BB 7, 5, 5, 3. Female P1..P8: 8, 8, 8, 7; male P9..P14:
	// 6, 3, 2, 0. Aged 55 (P1..P5): 5, 5, 5, 5; aged 72 (P6..P14): 9, 6, 5, 2.
	// Nobody flagged lacks a sex or an age, so those rows are left out; the
	// empty age bands (the one set, deid.AgeCuts) stay.
	type counts struct{ flagged, rec, read, af int }
	want := map[string]counts{
		"site: AA": {7, 6, 5, 4}, "site: BB": {7, 5, 5, 3},
		"sex: female": {8, 8, 8, 7}, "sex: male": {6, 3, 2, 0},
		"age band: <50": {}, "age band: 50-54": {}, "age band: 55-59": {5, 5, 5, 5}, "age band: 60-64": {}, "age band: 65-69": {},
		"age band: 70-74": {9, 6, 5, 2}, "age band: 75-79": {}, "age band: 80-84": {}, "age band: 85-89": {}, "age band: 90 or older": {},
	}
	var order []string
	for _, g := range a.Groups[1:] {
		key := g.Dimension + ": " + g.Label
		order = append(order, key)
		w, ok := want[key]
		if !ok {
			t.Errorf("unexpected group %s", key)
			continue
		}
		if got := (counts{g.Flagged, g.WithRecording, g.OverRead, g.Confirmed}); got != w {
			t.Errorf("%s: %+v, want %+v", key, got, w)
		}
	}
	wantOrder := []string{"site: AA", "site: BB", "sex: female", "sex: male", "age band: <50", "age band: 50-54", "age band: 55-59", "age band: 60-64",
		"age band: 65-69", "age band: 70-74", "age band: 75-79", "age band: 80-84", "age band: 85-89", "age band: 90 or older"}
	if !slices.Equal(order, wantOrder) {
		t.Errorf("groups %v, want %v", order, wantOrder)
	}
	if len(a.ByVersion) != 1 || a.ByVersion[0].Flagged != 14 || a.ByVersion[0].PPV != all.PPV || a.ByVersion[0].Label != "default v1" {
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
	if k := a.Kappa.Kappa; math.Abs(k.Kappa-0.38/0.58) > 1e-12 || math.Abs(k.Po-0.8) > 1e-12 || math.Abs(k.Pe-0.42) > 1e-12 {
		t.Errorf("kappa %+v, want 0.38/0.58", k)
	}
	if a.Kappa.Err != "" || a.Kappa.CI.Lo >= a.Kappa.Kappa.Kappa || a.Kappa.CI.Hi <= a.Kappa.Kappa.Kappa {
		t.Errorf("kappa interval %+v (%s)", a.Kappa.CI, a.Kappa.Err)
	}
	// The statistics and the cascade count the same cases.
	c := rs.Cascade(Filter{})
	for key, n := range map[string]int{"screen_positive": all.Flagged, "recording_returned": all.WithRecording, "over_read": all.OverRead, "af_confirmed": all.Confirmed} {
		if got := len(c.Box(key).Cases); got != n {
			t.Errorf("cascade %s has %d cases, statistics %d", key, got, n)
		}
	}
}

// TestAgreementWithoutReadings: with nothing over-read the PPV has no
// interval and kappa says why it is missing; a short recording is left out of
// kappa even when read.
func TestAgreementWithoutReadings(t *testing.T) {
	v1 := ProtocolRef{ID: 1, Name: "default", Version: 1, Active: true}
	rs := Rows{Protocol: v1, Versions: []ProtocolRef{v1}, Loc: time.UTC, AsOf: cohort.DateOf(day(10)),
		People: []Person{{ID: 1, Site: "AA", Sufficient: true, Positive: true}},
		Episodes: []Episode{{CaseID: 1, ParticipantID: 1, ProtocolID: 1, State: followup.RecordingReceived, Flagged: day0, ReachedAt: day(1),
			Recordings: []Recording{{ID: 1, Auto: overread.AutoSuggestsAF, TooShort: true, Conclusion: settled(overread.AF, 4)}}}}}
	a, err := rs.Agreement()
	if err != nil {
		t.Fatal(err)
	}
	all := a.Groups[0]
	if all.Flagged != 1 || all.OverRead != 0 || all.Wilson != (stats.Interval{}) || all.Exact != (stats.Interval{}) {
		t.Errorf("all %+v", all)
	}
	// Open and unread: censored at the as-of day, day 10.
	if all.Events != 0 || all.Censored != 1 || all.Median.Reached {
		t.Errorf("time to over-read %+v, %d events, %d censored", all.Median, all.Events, all.Censored)
	}
	if a.Kappa.N != 0 || a.Kappa.Err == "" {
		t.Errorf("kappa %+v", a.Kappa)
	}
	// Nobody has a sex or an age: those rows stay when someone flagged lacks them.
	var labels []string
	for _, g := range a.Groups {
		labels = append(labels, g.Label)
	}
	if !slices.Contains(labels, "not recorded") || !slices.Contains(labels, "age not recorded") {
		t.Errorf("groups %v", labels)
	}
}

func TestEnrolledBetween(t *testing.T) {
	d := func(s string) cohort.Date {
		t.Helper()
		v, err := cohort.ParseDate(s)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	var f Filter
	if err := f.EnrolledBetween(d("2026-03-02"), d("2026-03-08")); err != nil {
		t.Fatal(err)
	}
	// Both days included: the filter's end is the day after the last.
	if !f.From.Equal(time.Date(2026, 3, 2, 0, 0, 0, 0, time.UTC)) || !f.To.Equal(time.Date(2026, 3, 9, 0, 0, 0, 0, time.UTC)) {
		t.Errorf("from %v to %v", f.From, f.To)
	}
	if err := f.EnrolledBetween(d("2026-03-02"), d("2026-03-02")); err != nil || !f.To.Equal(time.Date(2026, 3, 3, 0, 0, 0, 0, time.UTC)) {
		t.Errorf("one day: to %v, %v", f.To, err)
	}
	if err := f.EnrolledBetween(cohort.Date{}, d("2026-03-08")); err != nil || !f.From.IsZero() {
		t.Errorf("open start: from %v, %v", f.From, err)
	}
	before := f
	if err := f.EnrolledBetween(d("2026-03-08"), d("2026-03-07")); !errors.Is(err, ErrPeriod) || f != before {
		t.Errorf("a period ending before it starts: %v, filter %+v", err, f)
	}
}

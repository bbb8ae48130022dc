package referral

import (
	"encoding/json"
	"errors"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/deid/deidtest"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/risk"
	"cohortdesk/cohort/screen"
)

var secret = []byte("referral test secret, 32+ characters long")

func date(tb testing.TB, s string) cohort.Date {
	tb.Helper()
	d, err := cohort.ParseDate(s)
	if err != nil {
		tb.Fatal(err)
	}
	return d
}

// source is a fictional participant with one flagged week, a recording and
// an AF over-read.
func source(tb testing.TB) Source {
	tb.Helper()
	birth := date(tb, "1951-05-20")
	loc, err := time.LoadLocation("America/Chicago")
	if err != nil {
		tb.Fatal(err)
	}
	rr := ecgtest.AFRR(60, 700, 3)
	syn, err := ecg.Synthesize(rr, ecg.SynthOptions{RateHz: 250})
	if err != nil {
		tb.Fatal(err)
	}
	var beats []int
	for _, t := range syn.RTimes {
		beats = append(beats, int(t*250))
	}
	return Source{
		StudyID: "NH-0042", EnrolledOn: date(tb, "2025-01-06"), Location: loc, BirthDate: &birth, Sex: cohort.Female,
		Intake:   risk.Intake{Hypertension: risk.Yes, Diabetes: risk.No, HeartFailure: risk.No, StrokeTIA: risk.No, Vascular: risk.No},
		Protocol: Protocol{ID: 1, Name: "weekly screen", Version: 2, Params: screen.DefaultProtocol(), ParamsOK: true},
		Weeks: []Week{
			{Week: 5, Verdict: "positive", Reason: "positive by run", WearHours: 101.24, Result: screen.Result{Windows: []screen.WindowResult{{Minutes: 30, Usable: 200, Irregular: 20, Share: 0.1}}}},
			{Week: 3, Verdict: "positive", Reason: "positive by share", WearHours: 90, Result: screen.Result{Windows: []screen.WindowResult{{Minutes: 30, Usable: 200, Irregular: 50, Share: 0.25}}}},
		},
		Recording:    &Recording{TakenAt: time.Date(2025, 2, 20, 9, 30, 0, 0, loc), DurationS: syn.Waveform.Seconds(), RateHz: 250, Samples: syn.Waveform.Samples, Beats: beats, Auto: overread.AutoSuggestsAF},
		OverRead:     &OverRead{Role: "first", Rhythm: "af", Confidence: "certain", ReadOn: date(tb, "2025-02-24")},
		ContactRoute: "Study office: reply through the secure message line quoting the referral code.",
		Cautions:     []string{"Screening is not diagnosis."},
		IssuedAt:     time.Date(2025, 3, 3, 15, 0, 0, 0, time.UTC),
	}
}

func mustBuild(tb testing.TB, src Source) Summary {
	tb.Helper()
	s, err := Build(src, secret)
	if err != nil {
		tb.Fatal(err)
	}
	return s
}

func TestBuildDeIdentifies(t *testing.T) {
	src := source(t)
	s := mustBuild(t, src)
	if s.ReferralCode != deid.Code(secret, "NH-0042") || !deid.ValidCode(s.ReferralCode) {
		t.Errorf("referral code %q", s.ReferralCode)
	}
	if s.IssuedStudyDay != 56 {
		t.Errorf("issued on study day %d, want 56 (2025-03-03 is 56 days after 2025-01-06)", s.IssuedStudyDay)
	}
	if s.OverRead == nil || s.OverRead.StudyDay != 49 || s.OverRead.RhythmLabel != "atrial fibrillation" {
		t.Errorf("over-read %+v, want AF read on study day 49", s.OverRead)
	}
	if s.Recording == nil || s.Recording.StudyDay != 45 {
		t.Errorf("recording %+v, want study day 45", s.Recording)
	}
	if s.AgeBand != "70-74" || s.Sex != "female" {
		t.Errorf("age band %q sex %q, want 70-74 female (born 1951-05-20, on 2025-03-03 aged 73)", s.AgeBand, s.Sex)
	}
	if len(s.FlaggedWeeks) != 2 || s.FlaggedWeeks[0].StudyWeek != 3 || !s.FlaggedWeeks[0].MostIrregular || s.FlaggedWeeks[1].MostIrregular {
		t.Errorf("weeks %+v: want week 3 first and marked most irregular", s.FlaggedWeeks)
	}
	if s.FlaggedWeeks[1].FirstDay != 35 || s.FlaggedWeeks[1].LastDay != 41 || s.FlaggedWeeks[1].WearHours != 101.2 {
		t.Errorf("week 5 shown as %+v", s.FlaggedWeeks[1])
	}
	if s.Cautions[len(s.Cautions)-1] != deid.ReviewCaution {
		t.Error("the Safe Harbor review caution is missing")
	}
	b, _ := json.Marshal(s)
	for _, leak := range []string{"NH-0042", "1951", "2025-0", "05-20", "Chicago"} {
		if strings.Contains(string(b), leak) {
			t.Errorf("content contains %q", leak)
		}
	}
	if leaks := deidtest.Leaks(string(b), []string{"NH-0042", "1951-05-20", "2025-02-24", "2025-02-20", "2025-03-03", "2025-01-06"}); len(leaks) > 0 {
		t.Errorf("content leaks %v", leaks)
	}
}

// Safe Harbor folds ages over 89 (45 CFR 164.514(b)(2)(i)(C); verified):
// born so that on the issue day the age is 89, 90 and 91.
func TestBuildAgeBoundary(t *testing.T) {
	for _, tt := range []struct {
		birth, want string
		riskAge     string
	}{
		{"1935-03-04", "85-89", "age 75 or over"}, // 89, turns 90 tomorrow
		{"1935-03-03", deid.Over89Label, "age 75 or over"},
		{"1934-01-15", deid.Over89Label, "age 75 or over"},
	} {
		src := source(t)
		b := date(t, tt.birth)
		src.BirthDate = &b
		s := mustBuild(t, src)
		if s.AgeBand != tt.want {
			t.Errorf("born %s: band %q, want %q", tt.birth, s.AgeBand, tt.want)
		}
		if !strings.Contains(mustJSON(t, s.Risk), tt.riskAge) {
			t.Errorf("born %s: risk items do not count %q", tt.birth, tt.riskAge)
		}
		if strings.Contains(mustJSON(t, s), tt.birth[:4]) {
			t.Errorf("born %s: the birth year appears", tt.birth)
		}
	}
	// Without a birth date the age at enrolment carries on: 89 at
	// enrolment, issued more than a year later, is 90 or older.
	src := source(t)
	src.BirthDate = nil
	age := 89
	src.AgeAtEnrolment = &age
	src.IssuedAt = time.Date(2026, 2, 1, 12, 0, 0, 0, time.UTC)
	if s := mustBuild(t, src); s.AgeBand != deid.Over89Label {
		t.Errorf("89 at enrolment, 13 months on: band %q", s.AgeBand)
	}
	src.AgeAtEnrolment = nil
	if s := mustBuild(t, src); s.AgeBand != "not recorded" || s.Risk.Scores[0].Complete {
		t.Errorf("no age: band %q, complete %v", s.AgeBand, s.Risk.Scores[0].Complete)
	}
}

func mustJSON(tb testing.TB, v any) string {
	tb.Helper()
	b, err := json.Marshal(v)
	if err != nil {
		tb.Fatal(err)
	}
	return string(b)
}

// Worked cases through the summary. CHA2DS2-VASc points: Lip GYH et al.
// Chest 2010;137:263-72 (verified, secondary; check-values.md): C 1, H 1,
// A2 2, D 1, S2 2, V 1, A 1, Sc 1. CHA2DS2-VA: the same without Sc (2024 ESC
// AF guidelines; from memory). Adjusted annual stroke rates by score (verified,
// secondary): 1 -> 1.3, 2 -> 2.2, 5 -> 6.7.
func TestBuildRiskScores(t *testing.T) {
	tests := []struct {
		name      string
		birth     string
		sex       cohort.Sex
		in        risk.Intake
		vasc, va  int
		complete  bool
		rate      string
		wantCodes string
	}{
		{"woman 78 with hypertension and diabetes", "1946-06-01", cohort.Female,
			risk.Intake{HeartFailure: risk.No, Hypertension: risk.Yes, Diabetes: risk.Yes, StrokeTIA: risk.No, Vascular: risk.No},
			5, 4, true, "6.7%", "H A2 D Sc"},
		{"man 66 with heart failure, prior stroke and vascular disease", "1958-06-01", cohort.Male,
			risk.Intake{HeartFailure: risk.Yes, Hypertension: risk.No, Diabetes: risk.No, StrokeTIA: risk.Yes, Vascular: risk.Yes},
			5, 5, true, "6.7%", "C S2 V A"},
		{"woman 60 without risk factors", "1964-06-01", cohort.Female,
			risk.Intake{HeartFailure: risk.No, Hypertension: risk.No, Diabetes: risk.No, StrokeTIA: risk.No, Vascular: risk.No},
			1, 0, true, "1.3%", "Sc"},
		{"man 70 with hypertension, diabetes unanswered", "1954-06-01", cohort.Male,
			risk.Intake{HeartFailure: risk.No, Hypertension: risk.Yes, Diabetes: risk.Unknown, StrokeTIA: risk.No, Vascular: risk.No},
			2, 2, false, "", "H A"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			src := source(t)
			b := date(t, tt.birth)
			src.BirthDate, src.Sex, src.Intake = &b, tt.sex, tt.in
			s := mustBuild(t, src)
			if len(s.Risk.Scores) != 2 {
				t.Fatalf("%d scores", len(s.Risk.Scores))
			}
			vasc, va := s.Risk.Scores[0], s.Risk.Scores[1]
			if vasc.Name != "CHA2DS2-VASc" || vasc.Points != tt.vasc || vasc.Max != 9 || vasc.Complete != tt.complete {
				t.Errorf("CHA2DS2-VASc = %+v, want %d of 9, complete %v", vasc, tt.vasc, tt.complete)
			}
			if va.Name != "CHA2DS2-VA" || va.Points != tt.va || va.Max != 8 {
				t.Errorf("CHA2DS2-VA = %+v, want %d of 8", va, tt.va)
			}
			var codes []string
			for _, it := range vasc.Items {
				codes = append(codes, it.Code)
			}
			if got := strings.Join(codes, " "); got != tt.wantCodes {
				t.Errorf("items %q, want %q", got, tt.wantCodes)
			}
			if (tt.rate == "") != (vasc.StrokeRate == "") || !strings.HasPrefix(vasc.StrokeRate, tt.rate) {
				t.Errorf("stroke rate %q, want %q", vasc.StrokeRate, tt.rate)
			}
			if vasc.Source != SourceVASc || va.Source != SourceVA || !strings.HasPrefix(s.Risk.Note, "For physician review") {
				t.Error("scores must carry their sources and the physician-review label")
			}
			if !tt.complete && !strings.HasPrefix(vasc.ScoreText(), "at least") {
				t.Errorf("incomplete score worded %q", vasc.ScoreText())
			}
		})
	}
}

// The recorded content decodes to the same digest: what was issued can be
// drawn again and checked.
func TestContentRoundTrip(t *testing.T) {
	s := mustBuild(t, source(t))
	want, err := Digest(s)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := Content(s)
	// The database keeps JSON in its own key order and spacing.
	var generic map[string]any
	if err := json.Unmarshal(b, &generic); err != nil {
		t.Fatal(err)
	}
	reordered, _ := json.MarshalIndent(generic, "", "  ")
	back, err := Decode(reordered)
	if err != nil {
		t.Fatal(err)
	}
	if got, _ := Digest(back); got != want {
		t.Errorf("digest after round trip %s, want %s", got, want)
	}
	other := mustBuild(t, source(t))
	other.OverRead.StudyDay++
	if got, _ := Digest(other); got == want {
		t.Error("a changed summary has the same digest")
	}
	if _, err := Decode([]byte(`{"format_version": 99}`)); !errors.Is(err, ErrInvalid) {
		t.Errorf("other format version: %v", err)
	}
}

func TestBuildRefuses(t *testing.T) {
	src := source(t)
	if _, err := Build(src, []byte("short")); !errors.Is(err, deid.ErrInvalid) {
		t.Errorf("short secret: %v", err)
	}
	src.StudyID = " "
	if _, err := Build(src, secret); !errors.Is(err, ErrInvalid) {
		t.Errorf("empty study ID: %v", err)
	}
}

// The strip shows at most 30 s (the minimum for an AF diagnosis, 2020 ESC
// AF guidelines; verified, secondary) at true scale: 25 mm/s, 10 mm/mV
// (common practice; Kligfield et al. 2007, from memory).
func TestRecordingStrip(t *testing.T) {
	src := source(t)
	long := make([]float64, 45*250)
	for i := range long {
		long[i] = 1.5 // 1.5 mV
	}
	src.Recording.Samples, src.Recording.Beats = long, []int{100, 8000, 11000}
	s := mustBuild(t, src)
	r := s.Recording
	if r.ShownSeconds != 30 || len(r.MicroVolts) != 7500 || r.MicroVolts[0] != 1500 {
		t.Fatalf("shown %.1f s, %d samples, first %d µV", r.ShownSeconds, len(r.MicroVolts), r.MicroVolts[0])
	}
	if len(r.Beats) != 1 {
		t.Errorf("beats %v, want only the one inside the shown 30 s", r.Beats)
	}
	l := r.Strip()
	if len(l.Rows) != 5 || l.Options.SpeedMMPerS != 25 || l.Options.GainMMPerMV != 10 {
		t.Errorf("strip: %d rows at %.0f mm/s, %.0f mm/mV; want 5 rows of 6 s at 25 and 10", len(l.Rows), l.Options.SpeedMMPerS, l.Options.GainMMPerMV)
	}
	if l.WidthMM > 180 {
		t.Errorf("strip %.0f mm wide: does not fit A4 or Letter with 15 mm margins", l.WidthMM)
	}
}

// Heart rates are binned by ten minutes from the week's start, and the
// irregular windows of the screen's rule are marked.
func TestHeartRateChart(t *testing.T) {
	src := source(t)
	start := src.EnrolledOn.AddDays(21).In(src.Location).UnixMilli()
	w := &cohort.Week{Week: 3, Start: start, End: start + 7*24*3600*1000}
	// Two hours of steady 60 bpm every minute, then one hour alternating
	// 60 and 90 bpm (MASD 30 bpm, far above the 7 bpm threshold).
	for m := 0; m < 180; m++ {
		v := int32(60)
		if m >= 120 && m%2 == 1 {
			v = 90
		}
		w.HR.Append(start+int64(m)*60000, v)
	}
	w.HR.Append(start+int64(200)*60000, 400) // implausible, dropped
	src.HeartRate = w
	src.Weeks = []Week{{Week: 3, Verdict: "positive", Result: screen.Result{Windows: []screen.WindowResult{
		{Minutes: 5, Usable: 0}, {Minutes: 30, Usable: 6, Irregular: 2, Share: 0.33, Threshold: 7}}}}}
	s := mustBuild(t, src)
	h := s.HeartRate
	if h == nil || h.Readings != 180 || len(h.Bins) != 18 || h.Minutes != 10080 {
		t.Fatalf("heart rate %+v", h)
	}
	if h.Bins[12].Min != 60 || h.Bins[12].Max != 90 || h.Bins[0].Max != 60 {
		t.Errorf("bins %+v", h.Bins[:13])
	}
	if h.WindowMinutes != 30 || len(h.Irregular) != 1 || h.Irregular[0] != (Span{120, 180}) {
		t.Errorf("irregular spans %+v of %d-minute windows, want minutes 120-180", h.Irregular, h.WindowMinutes)
	}
	l := h.Layout(180, 60)
	if len(l.Bars) != 18 || len(l.Shades) != 1 || len(l.XTicks) != 8 || l.XTicks[0].Label != "day 21" {
		t.Errorf("layout: %d bars, %d shades, x ticks %+v", len(l.Bars), len(l.Shades), l.XTicks)
	}
	for _, b := range l.Bars {
		if b.X < l.Left || b.X > l.Right || b.Y1 < l.Top-0.2 || b.Y2 > l.Bottom+0.2 || b.Y1 > b.Y2 {
			t.Fatalf("bar %+v outside the plot %+v", b, l)
		}
	}
}

// TestWithdrawnSummaryNeedsConfirmation: a summary of a participant who is
// still enrolled is issued as asked; one of a withdrawn participant only
// with the issuer's confirmation, and the warning says when they left (in
// study days, no date), why no sign-off follows and what can still be done.
func TestWithdrawnSummaryNeedsConfirmation(t *testing.T) {
	enrolled := cohort.Date{Year: 2026, Month: 3, Day: 4}
	if w := WithdrawalOf(enrolled, nil, "v2"); w != nil || CheckIssue(w, false) != nil {
		t.Fatalf("enrolled participant: withdrawal %v, check %v", w, CheckIssue(w, false))
	}
	left := enrolled.AddDays(45)
	w := WithdrawalOf(enrolled, &left, "v2")
	if w == nil || w.StudyDay != 45 {
		t.Fatalf("withdrawal %+v, want study day 45", w)
	}
	var ve *cohort.ValidationError
	if err := CheckIssue(w, false); !errors.As(err, &ve) || ve.Fields[ConfirmWithdrawnField] == "" {
		t.Fatalf("unconfirmed issue for a withdrawn participant: %v", err)
	}
	if err := CheckIssue(w, true); err != nil {
		t.Fatalf("confirmed issue: %v", err)
	}
	msg := w.Warning()
	for _, want := range []string{"study day 45", "cannot be signed off", "What you can still do", `consent version "v2"`, "participant note"} {
		if !strings.Contains(msg, want) {
			t.Errorf("warning lacks %q: %s", want, msg)
		}
	}
	if strings.Contains(msg, left.String()) {
		t.Errorf("warning shows the withdrawal date: %s", msg)
	}
}

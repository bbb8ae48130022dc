package demo

import (
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
)

// The demo speaks the app's own vocabulary: case states, contact channels and
// outcomes are followup's, rhythms and the recorder's automatic readings are
// overread's, so the loader enters a script as it stands.
//
// The script only makes these moves (a subset of followup's state table):
// open to contacting, reached, closed_withdrawn; contacting to reached,
// closed_unreachable, closed_withdrawn; reached to recorder_sent,
// closed_declined, closed_withdrawn; recorder_sent to recording_received,
// closed_withdrawn; recording_received to over_read, recorder_sent (a repeat
// recording after an unusable one), closed_withdrawn; over_read to referred,
// closed_not_confirmed, closed_withdrawn.

// Transition is one state change of a case.
type Transition struct {
	At       time.Time
	From, To followup.State
	By       string // user login
}

// Attempt is one logged contact attempt. Notes are short invented texts
// without identifying details; free-text notes never leave the system anyway.
type Attempt struct {
	At      time.Time
	By      string
	Channel followup.Channel
	Outcome followup.Outcome
	Note    string
}

// Recording is one handheld single-lead ECG recording and what became of it.
// Beats fall at FirstBeat, FirstBeat+RR[0], FirstBeat+RR[0]+RR[1], ... seconds
// from the start, so the loader can synthesise a waveform with beats at known
// times. Recordings under 30 s (ecg.MinDiagnosticSeconds) occur on purpose
// (AF needs at least 30 s of ECG to be diagnosed).
type Recording struct {
	Taken     time.Time
	Received  time.Time
	Seconds   float64         // duration of the recording
	FirstBeat float64         // seconds from the start to the first beat
	RR        []float64       // seconds between successive beats; FirstBeat plus their sum is at most Seconds
	Rhythm    overread.Rhythm // rhythm the RR series was made with (ground truth)
	Noisy     bool            // synthesise with heavy artefact: an over-reader cannot read it
	Auto      overread.Auto
	OverRead  overread.Rhythm // empty until read
	ReadAt    time.Time       // zero until read
	Reader    string          // login of the over-reader
}

// FollowUp is the scripted history of one case as of the study's today.
type FollowUp struct {
	Case        CaseInput
	Site        string
	Owner       string         // coordinator login
	Truth       EpisodeKind    // episode behind the flag; empty for a false alarm
	Final       followup.State // state as of today
	Transitions []Transition
	Attempts    []Attempt
	Recordings  []Recording
}

// PlanFollowUps scripts the given cases (in any order; the result is in the
// same order). Cases of participants who withdrew end closed_withdrawn at the
// withdrawal. Then it makes sure every other state occurs at least once, when
// the cases allow: a referral needs a case with an AF episode behind it, and
// terminal states need time before today. The remaining cases follow their
// natural course from the ground truth, cut at today. An unknown study ID
// gives a case that stays open. Every event lies between the case's opening
// and the study's today.
func (s *Study) PlanFollowUps(cases []CaseInput) []FollowUp {
	out := make([]FollowUp, len(cases))
	done := make([]bool, len(cases))
	truth := make([]EpisodeKind, len(cases))
	covered := map[followup.State]bool{}
	for i, c := range cases {
		p, ok := s.Participant(c.StudyID)
		if !ok {
			out[i] = FollowUp{Case: c, Final: followup.Open}
			done[i] = true
			continue
		}
		truth[i] = s.caseTruth(p, c)
		if w, ok := s.withdrawalTime(p); ok && !w.After(s.Today) {
			// The participant left while the recorder was out (or before the
			// case opened); either way the case ends closed_withdrawn.
			out[i] = s.simulate(c, p, truth[i], followup.RecorderSent)
			done[i] = true
			covered[out[i].Final] = true
		}
	}
	// Cover every state: terminal states from the oldest cases, states in
	// progress from the newest, as a real triage list would look.
	order := []followup.State{followup.Referred, followup.ClosedNotConfirmed, followup.ClosedUnreachable, followup.ClosedDeclined,
		followup.OverRead, followup.RecordingReceived, followup.RecorderSent, followup.Reached, followup.Contacting, followup.Open}
	for _, st := range order {
		if covered[st] {
			continue
		}
		idx := make([]int, 0, len(cases))
		for i := range cases {
			if !done[i] {
				idx = append(idx, i)
			}
		}
		slices.SortStableFunc(idx, func(a, b int) int { return cases[a].Opened.Compare(cases[b].Opened) })
		if !st.Terminal() {
			slices.Reverse(idx)
		}
		if st == followup.Referred {
			// A canary's referral summary is the one the leak tests read.
			slices.SortStableFunc(idx, func(a, b int) int {
				pa, _ := s.Participant(cases[a].StudyID)
				pb, _ := s.Participant(cases[b].StudyID)
				return boolRank(pb.Canary) - boolRank(pa.Canary)
			})
		}
		for _, pass := range []int{0, 1} {
			found := false
			for _, i := range idx {
				if !compatible(st, truth[i], pass) {
					continue
				}
				p, _ := s.Participant(cases[i].StudyID)
				f := s.simulate(cases[i], p, truth[i], st)
				if f.Final == st {
					out[i], done[i] = f, true
					covered[st] = true
					found = true
					break
				}
			}
			if found {
				break
			}
		}
	}
	for i, c := range cases {
		if done[i] {
			continue
		}
		p, _ := s.Participant(c.StudyID)
		out[i] = s.simulate(c, p, truth[i], s.naturalTarget(c, truth[i]))
	}
	return out
}

func boolRank(b bool) int {
	if b {
		return 1
	}
	return 0
}

// compatible says whether a case with this truth may be steered to st. On the
// second pass a "not confirmed" close may also come from an AF case whose
// recording caught sinus rhythm (the episode had ended).
func compatible(st followup.State, truth EpisodeKind, pass int) bool {
	switch st {
	case followup.Referred:
		return truth == EpisodeAF
	case followup.ClosedNotConfirmed:
		return truth != EpisodeAF || pass == 1
	}
	return true
}

// caseTruth is the episode kind behind a case: any episode overlapping the
// flagged week or the week after, AF taking precedence.
func (s *Study) caseTruth(p Participant, c CaseInput) EpisodeKind {
	pl, ok := s.planOf(p)
	if !ok {
		return ""
	}
	ws, _ := cohort.WeekBounds(p.Enrolled, p.Loc, c.Week)
	_, we := cohort.WeekBounds(p.Enrolled, p.Loc, c.Week+1)
	var k EpisodeKind
	for _, e := range pl.episodes {
		if e.a < we.UnixMilli() && e.b > ws.UnixMilli() && k != EpisodeAF {
			k = e.kind
		}
	}
	return k
}

// withdrawalTime is when p's withdrawal was recorded: 10:00 on the withdrawal
// day in p's zone.
func (s *Study) withdrawalTime(p Participant) (time.Time, bool) {
	if p.Withdrawn.IsZero() {
		return time.Time{}, false
	}
	return p.Withdrawn.In(p.Loc).Add(10 * time.Hour), true
}

// caseRand is the generator of one case, keyed by participant and week so a
// case's script does not change when other cases are added.
func (s *Study) caseRand(c CaseInput, salt uint64) *rand.Rand {
	return newRand(s.seed, streamCase, hashString(c.StudyID), uint64(int64(c.Week))<<8|salt)
}

// naturalTarget is where a case would end if left to its course: a few
// participants cannot be reached or decline, the rest are over-read and
// referred or closed by the verdict (drawn in simulate from the truth).
func (s *Study) naturalTarget(c CaseInput, truth EpisodeKind) followup.State {
	r := s.caseRand(c, 1)
	switch u := r.Float64(); {
	case u < 0.07:
		return followup.ClosedUnreachable
	case u < 0.13:
		return followup.ClosedDeclined
	}
	return "" // decided by the over-read
}

// Invented note texts, by outcome. A message left by phone is a voicemail;
// by text message, e-mail or letter it is a message sent with no reply yet.
var notes = map[followup.Outcome][]string{
	followup.OutcomeNoAnswer:    {"No answer; will try again.", "Phone rang out, no voicemail set up."},
	followup.OutcomeMessageLeft: {"Left a message asking for a call back.", "Left a voicemail with the study line number."},
	followup.OutcomeReached:     {"Spoke with the participant; agreed to make a recording.", "Reached; explained the recorder and the next steps."},
	followup.OutcomeDeclined:    {"Participant prefers not to continue with follow-up; thanked them."},
}

// sentNotes are the notes of a message sent in writing (text message, e-mail,
// letter) that got no reply.
var sentNotes = []string{"Sent the standard follow-up message.", "Follow-up sent; no reply so far."}

// sim carries one case's script while it is written.
type sim struct {
	s     *Study
	r     *rand.Rand
	p     Participant
	f     FollowUp
	state followup.State
	inv   string
}

func (m *sim) move(at time.Time, to followup.State, by string) {
	m.f.Transitions = append(m.f.Transitions, Transition{At: at, From: m.state, To: to, By: by})
	m.state = to
}

func (m *sim) attempt(at time.Time, ch followup.Channel, o followup.Outcome) {
	txt := notes[o]
	if o == followup.OutcomeMessageLeft && ch != followup.ChannelPhone {
		txt = sentNotes
	}
	m.f.Attempts = append(m.f.Attempts, Attempt{At: at, By: m.f.Owner, Channel: ch, Outcome: o, Note: txt[m.r.IntN(len(txt))]})
}

// simulate writes the script of one case steered to target (empty: decided by
// the over-read), then cuts it at a withdrawal and at today.
func (s *Study) simulate(c CaseInput, p Participant, truth EpisodeKind, target followup.State) FollowUp {
	inv, _ := s.User(cohort.Investigator)
	m := &sim{s: s, r: s.caseRand(c, 2), p: p, state: followup.Open, inv: inv.Login}
	m.f = FollowUp{Case: c, Site: p.Site, Owner: s.coordinatorFor(p.Site), Truth: truth}
	m.script(target)
	s.cut(m)
	return m.f
}

// script writes the full course towards target, ignoring today.
func (m *sim) script(target followup.State) {
	s, r, owner := m.s, m.r, m.f.Owner
	if target == followup.Open {
		return
	}
	if w, ok := s.withdrawalTime(m.p); ok && !w.After(m.f.Case.Opened) {
		m.move(s.workTime(r, m.f.Case.Opened, 0, 1), followup.ClosedWithdrawn, owner)
		return
	}
	// Contact attempts.
	fails := pick(r, []float64{0.45, 0.35, 0.2})
	switch target {
	case followup.Contacting:
		fails = 1 + r.IntN(2)
	case followup.ClosedUnreachable:
		fails = 4 + r.IntN(2)
	}
	channels := []followup.Channel{followup.ChannelPhone, followup.ChannelPhone, followup.ChannelText, followup.ChannelEmail, followup.ChannelLetter}
	t := m.f.Case.Opened
	for i := range fails {
		if i == 0 {
			t = s.workTime(r, t, 0, 2)
		} else {
			t = s.workTime(r, t, 1, 3)
		}
		ch := channels[i%len(channels)]
		o := followup.OutcomeMessageLeft
		if ch == followup.ChannelPhone {
			o = []followup.Outcome{followup.OutcomeNoAnswer, followup.OutcomeMessageLeft}[r.IntN(2)]
		}
		m.attempt(t, ch, o)
		if i == 0 {
			m.move(t, followup.Contacting, owner)
		}
	}
	switch target {
	case followup.Contacting:
		return
	case followup.ClosedUnreachable:
		m.move(s.workTime(r, t, 5, 7), followup.ClosedUnreachable, owner)
		return
	}
	if fails == 0 {
		t = s.workTime(r, t, 0, 2)
	} else {
		t = s.workTime(r, t, 1, 2)
	}
	m.attempt(t, followup.ChannelPhone, followup.OutcomeReached)
	if target == followup.ClosedDeclined {
		m.f.Attempts[len(m.f.Attempts)-1].Note = "Reached; wants a few days to think about the recorder."
		m.move(t, followup.Reached, owner)
		t = s.workTime(r, t, 1, 3)
		m.attempt(t, followup.ChannelPhone, followup.OutcomeDeclined)
		m.move(t, followup.ClosedDeclined, owner)
		return
	}
	m.move(t, followup.Reached, owner)
	if target == followup.Reached {
		return
	}
	t = s.workTime(r, t, 1, 3)
	m.move(t, followup.RecorderSent, owner)
	if target == followup.RecorderSent {
		return
	}
	rhythm := m.drawRhythm(target)
	// One recording in seven is unusable at first (too short or too noisy)
	// and a repeat is asked for.
	unusable := r.Float64() < 1.0/7
	for {
		rec := m.record(t, rhythm, unusable)
		t = rec.Received
		m.move(t, followup.RecordingReceived, owner)
		if target == followup.RecordingReceived {
			m.f.Recordings = append(m.f.Recordings, rec)
			return
		}
		t = s.workTime(r, t, 1, 3)
		rec.ReadAt, rec.Reader = t, m.inv
		rec.OverRead = m.read(rec)
		m.f.Recordings = append(m.f.Recordings, rec)
		if rec.OverRead != overread.Uninterpretable {
			break
		}
		t = s.workTime(r, t, 0, 1)
		m.move(t, followup.RecorderSent, owner)
		unusable = false
	}
	m.move(t, followup.OverRead, m.inv)
	if target == followup.OverRead {
		return
	}
	t = s.workTime(r, t, 1, 3)
	// Only a confirmed AF is referred (the investigator signs its summary
	// off); atrial flutter and every other reading end not confirmed.
	if v := m.f.Recordings[len(m.f.Recordings)-1].OverRead; v == overread.AF {
		m.move(t, followup.Referred, m.inv)
	} else {
		m.move(t, followup.ClosedNotConfirmed, m.inv)
	}
}

// drawRhythm draws the rhythm a recording catches. It follows the truth with
// noise: a paroxysm may have ended by the time of the recording, and ectopy
// may or may not show. Steered terminal states fix the verdict's side.
func (m *sim) drawRhythm(target followup.State) overread.Rhythm {
	r := m.r
	var opts []overread.Rhythm
	var ws []float64
	switch m.f.Truth {
	case EpisodeAF:
		opts, ws = []overread.Rhythm{overread.AF, overread.Flutter, overread.Sinus}, []float64{0.78, 0.07, 0.15}
	case EpisodeEctopy:
		opts, ws = []overread.Rhythm{overread.Other, overread.Sinus}, []float64{0.6, 0.4}
	default:
		opts, ws = []overread.Rhythm{overread.Sinus, overread.Other, overread.AF}, []float64{0.88, 0.1, 0.02}
	}
	switch target {
	case followup.Referred:
		opts, ws = []overread.Rhythm{overread.AF}, []float64{1}
	case followup.ClosedNotConfirmed:
		if m.f.Truth == EpisodeAF {
			opts, ws = []overread.Rhythm{overread.Sinus}, []float64{1}
		} else {
			opts, ws = []overread.Rhythm{overread.Sinus, overread.Other}, []float64{0.6, 0.4}
		}
	}
	return opts[pick(r, ws)]
}

// record makes one recording taken a few days after t and received by the
// office a working day or three later.
func (m *sim) record(t time.Time, rhythm overread.Rhythm, unusable bool) Recording {
	r := m.r
	rec := Recording{Rhythm: rhythm}
	rec.Taken = m.s.participantTime(r, m.p, t, 2, 6)
	rec.Received = m.s.workTime(r, rec.Taken, 1, 3)
	rec.Seconds = math.Round(between(r, 30, 60))
	short := false
	if unusable {
		if r.IntN(2) == 0 {
			rec.Seconds, short = math.Round(between(r, 12, 29)), true
		} else {
			rec.Noisy = true
		}
	}
	rec.FirstBeat, rec.RR = recordingRR(r, rhythm, rec.Seconds)
	rec.Auto = autoResult(r, rhythm, short, rec.Noisy)
	return rec
}

// read is the over-reader's verdict: unreadable recordings (too short to
// diagnose, or noisy) are uninterpretable; otherwise the truth, with an
// occasional confusion between AF and flutter.
func (m *sim) read(rec Recording) overread.Rhythm {
	if rec.Noisy || ecg.TooShort(rec.Seconds) {
		return overread.Uninterpretable
	}
	if m.r.Float64() < 0.04 {
		switch rec.Rhythm {
		case overread.AF:
			return overread.Flutter
		case overread.Flutter:
			return overread.AF
		}
	}
	return rec.Rhythm
}

// autoResult imitates a recorder's own algorithm: right most of the time,
// making no rhythm call for rhythms it was not built for, unable to analyse
// short or noisy recordings.
func autoResult(r *rand.Rand, rh overread.Rhythm, short, noisy bool) overread.Auto {
	opts := []overread.Auto{overread.AutoSuggestsAF, overread.AutoSuggestsRegular, overread.AutoNoCall, overread.AutoNotAnalysed}
	var ws []float64
	switch {
	case short:
		ws = []float64{0, 0, 0.2, 0.8}
	case noisy:
		ws = []float64{0, 0, 0.6, 0.4}
	case rh == overread.AF:
		ws = []float64{0.85, 0.05, 0.1, 0}
	case rh == overread.Flutter:
		ws = []float64{0.3, 0.2, 0.5, 0}
	case rh == overread.Other:
		ws = []float64{0.2, 0.3, 0.5, 0}
	default:
		ws = []float64{0.03, 0.9, 0.07, 0}
	}
	return opts[pick(r, ws)]
}

// recordingRR draws beat intervals (seconds, millisecond resolution) filling
// at most seconds. Sinus rhythm swings a few percent with breathing; AF draws
// independent intervals with a wide spread; flutter conducts every second
// (sometimes third or fourth) flutter wave of a 190-230 ms cycle; other
// arrhythmia is sinus rhythm with early beats and compensatory pauses.
func recordingRR(r *rand.Rand, rh overread.Rhythm, seconds float64) (first float64, rr []float64) {
	base := 60 / between(r, 58, 88)
	amp := between(r, 0.02, 0.05)
	breath := between(r, 3.8, 5.5)
	phase := between(r, 0, 2*math.Pi)
	afMean := 60 / between(r, 85, 125)
	cycle := between(r, 0.19, 0.23)
	variable := r.Float64() < 0.3
	out := make([]float64, 0, int(seconds*2.5)+2)
	first = math.Round(between(r, 0.2, 0.8)*1000) / 1000
	total := first
	prevEarly := false
	for i := 0; ; i++ {
		var rr float64
		switch rh {
		case overread.AF:
			rr = max(0.3, min(1.8, afMean*math.Exp(0.2*r.NormFloat64())))
		case overread.Flutter:
			block := 2.0
			if variable {
				block = float64(2 + pick(r, []float64{0.6, 0.3, 0.1}))
			}
			rr = cycle*block + 0.005*r.NormFloat64()
		default:
			rr = base*(1+amp*math.Sin(2*math.Pi*float64(i)/breath+phase)) + 0.01*r.NormFloat64()
			if rh == overread.Other {
				switch {
				case prevEarly:
					rr *= 1.38
					prevEarly = false
				case r.Float64() < 0.2:
					rr *= 0.62
					prevEarly = true
				}
			}
		}
		rr = math.Round(rr*1000) / 1000
		if total+rr > seconds {
			return first, out
		}
		total += rr
		out = append(out, rr)
	}
}

// cut trims a script at the participant's withdrawal (closing the case as
// withdrawn there) and at today, and sets the final state.
func (s *Study) cut(m *sim) {
	f := &m.f
	limit := s.Today
	w, withdrawn := s.withdrawalTime(m.p)
	if withdrawn && w.After(f.Case.Opened) && !w.After(s.Today) {
		limit = w
	} else {
		withdrawn = false
	}
	keepT := f.Transitions[:0]
	for _, tr := range f.Transitions {
		if !tr.At.After(limit) {
			keepT = append(keepT, tr)
		}
	}
	f.Transitions = keepT
	keepA := f.Attempts[:0]
	for _, a := range f.Attempts {
		if !a.At.After(limit) {
			keepA = append(keepA, a)
		}
	}
	f.Attempts = keepA
	keepR := f.Recordings[:0]
	for _, rec := range f.Recordings {
		if rec.Received.After(limit) {
			continue
		}
		if rec.ReadAt.After(limit) {
			rec.OverRead, rec.ReadAt, rec.Reader = "", time.Time{}, ""
		}
		keepR = append(keepR, rec)
	}
	f.Recordings = keepR
	f.Final = followup.Open
	if n := len(f.Transitions); n > 0 {
		f.Final = f.Transitions[n-1].To
	}
	if withdrawn && !f.Final.Terminal() {
		f.Transitions = append(f.Transitions, Transition{At: w, From: f.Final, To: followup.ClosedWithdrawn, By: f.Owner})
		f.Final = followup.ClosedWithdrawn
	}
}

// workTime is when office staff next act after t: minDays to maxDays working
// days later (weekends and closure days skipped), during office hours in the
// study zone. Zero days means later the same day when the office is still open.
func (s *Study) workTime(r *rand.Rand, t time.Time, minDays, maxDays int) time.Time {
	local := t.In(s.Loc)
	d := cohort.DateOf(local)
	k := betweenInt(r, minDays, maxDays)
	if k == 0 {
		if s.workingDay(d) && local.Hour() >= 8 && local.Hour() < 15 {
			return local.Add(time.Duration(20+r.IntN(100)) * time.Minute)
		}
		if !s.workingDay(d) || local.Hour() >= 8 {
			k = 1
		}
	}
	for k > 0 {
		d = d.AddDays(1)
		if s.workingDay(d) {
			k--
		}
	}
	return d.In(s.Loc).Add(8*time.Hour + 30*time.Minute + time.Duration(r.IntN(8*60))*time.Minute)
}

// participantTime is when the participant next acts after t: minDays to
// maxDays later, between 07:00 and 21:00 in their zone.
func (s *Study) participantTime(r *rand.Rand, p Participant, t time.Time, minDays, maxDays int) time.Time {
	d := cohort.DateOf(t.In(p.Loc)).AddDays(betweenInt(r, minDays, maxDays))
	at := d.In(p.Loc).Add(7*time.Hour + time.Duration(r.IntN(14*60))*time.Minute)
	if !at.After(t) {
		at = t.Add(time.Hour)
	}
	return at
}

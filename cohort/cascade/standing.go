package cascade

import (
	"cmp"
	"slices"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/overread"
)

// The cascade and the agreement statistics are sums over participants and
// episodes. Each participant's place in the cascade (Stand) and each
// episode's figures (Episode.Figure) depend on that participant's own rows
// only, so storage keeps them per participant, updated as the participant's
// rows change, and adds them up for a page (Counts, Sums); Rows.Cascade and
// Rows.Agreement count the very same functions over rows read whole, which
// is how the kept figures are checked.

// Standing is where one participant stands in the cascade of one protocol
// version: the furthest box reached and why they went no further.
type Standing struct {
	Box  int        // index of the box in Cascade.Boxes: 0 enrolled ... 7 referred
	Exit ExitReason // why they stopped in Box; "" in the last box
}

// Stand places a participant in the cascade of version protocolID from their
// screening flags under that version and their episodes (of any version;
// only that version's count). A participant's exit comes from the episode
// that went furthest, the latest flagged among equals (episodes in case
// order).
func Stand(p Person, episodes []Episode, protocolID int) Standing {
	var best *Episode
	bestStage := StageFlagged
	for i := range episodes {
		e := &episodes[i]
		if e.ProtocolID != protocolID {
			continue
		}
		st := e.stage()
		if best == nil || st > bestStage || (st == bestStage && !e.Flagged.Before(best.Flagged)) {
			best, bestStage = e, st
		}
	}
	switch {
	case !p.Sufficient && best == nil:
		if p.Withdrawn {
			return Standing{Box: 0, Exit: ExitWithdrawnEarly}
		}
		return Standing{Box: 0, Exit: ExitNoWearData}
	case !p.Positive && best == nil:
		return Standing{Box: 1, Exit: ExitScreenNegative}
	case best == nil:
		return Standing{Box: 2, Exit: ExitNoCase}
	}
	// Box 2 holds stage StageFlagged; box 2+k holds stage k.
	return Standing{Box: 2 + int(bestStage), Exit: best.exit()}
}

// Counts is the cascade of one protocol version in sums: participants by
// their standing, cases by their stage.
type Counts struct {
	People map[Standing]int
	Cases  [StageReferred + 1]int // the version's cases by stage
}

// Add counts n participants with standing st.
func (c *Counts) Add(st Standing, n int) {
	if c.People == nil {
		c.People = map[Standing]int{}
	}
	c.People[st] += n
}

// Cascade builds the boxes from the sums: a box holds every participant whose
// furthest box is it or a later one, and its exits are the participants who
// stopped in it, by reason.
func (c Counts) Cascade(f Filter, protocol ProtocolRef, versions []ProtocolRef) Cascade {
	f.ProtocolID = protocol.ID
	out := Cascade{Filter: f, Protocol: protocol, Versions: versions}
	bs := make([]Box, len(boxes))
	exits := make([]map[ExitReason]int, len(bs))
	for i, b := range boxes {
		bs[i] = Box{Key: b.key, Label: b.label, Definition: b.def}
		exits[i] = map[ExitReason]int{}
	}
	for st, n := range c.People {
		if n == 0 || st.Box < 0 || st.Box >= len(bs) {
			continue
		}
		for i := 0; i <= st.Box; i++ {
			bs[i].N += n
		}
		if st.Exit != "" {
			exits[st.Box][st.Exit] += n
		}
	}
	for k := StageFlagged; k <= StageReferred; k++ {
		for j := k; j <= StageReferred; j++ {
			bs[2+int(k)].CaseN += c.Cases[j]
		}
	}
	for i := range bs {
		for r, n := range exits[i] {
			if n != 0 {
				bs[i].Exits = append(bs[i].Exits, Exit{Reason: r, N: n})
			}
		}
		slices.SortFunc(bs[i].Exits, func(a, b Exit) int {
			return cmp.Or(cmp.Compare(b.N, a.N), cmp.Compare(a.Reason, b.Reason))
		})
	}
	out.Boxes = bs
	return out
}

// EpisodeFigure is what the agreement statistics take from one flagged
// episode.
type EpisodeFigure struct {
	Stage Stage
	// Settled: some recording's readings are settled (final).
	Settled bool
	// Uninterpretable: settled readings that are all "uninterpretable" and
	// no diagnostic over-read; counted apart from the PPV.
	Uninterpretable bool
	FlagDay         cohort.Date // the day of the flag in the study's time zone
	// Event: a diagnostic conclusion was settled, Days after the flag.
	// Closed: no such conclusion and the case ended, Days after the flag.
	// Neither: still open, censored at the as-of day (OpenDays).
	Event, Closed bool
	Days          int
}

// Figure computes the episode's figures; loc is the study's time zone, in
// which days are counted.
func (e Episode) Figure(loc *time.Location) EpisodeFigure {
	f := EpisodeFigure{Stage: e.stage(), FlagDay: cohort.DateOf(e.Flagged.In(loc))}
	anySettled, onlyUninterp := false, true
	for _, r := range e.Recordings {
		if r.Conclusion.Final {
			anySettled = true
			if r.Conclusion.Rhythm != overread.Uninterpretable {
				onlyUninterp = false
			}
		}
	}
	f.Settled = anySettled
	f.Uninterpretable = anySettled && onlyUninterp && f.Stage < StageOverRead
	if d, ok := e.firstDiagnostic(); ok {
		f.Event, f.Days = true, max(0, d.DaysSince(f.FlagDay))
		return f
	}
	if e.State.Terminal() && !e.ClosedAt.IsZero() {
		f.Closed, f.Days = true, max(0, cohort.DateOf(e.ClosedAt.In(loc)).DaysSince(f.FlagDay))
	}
	return f
}

// OpenDays is the follow-up of an open episode flagged on flagDay, censored
// at the day asOf.
func OpenDays(flagDay, asOf cohort.Date) int { return max(0, asOf.DaysSince(flagDay)) }

// KappaCell places a recording in the kappa table: the recorder's automatic
// interpretation against the settled over-read, for recordings of at least
// 30 s that have both; ok is false for the others.
func (r Recording) KappaCell() (auto, read overread.Category, ok bool) {
	a, okA := overread.AutoCategory(r.Auto)
	b, okB := overread.RhythmCategory(r.Conclusion.Rhythm)
	if !okA || !okB || !r.Conclusion.Final || r.TooShort {
		return "", "", false
	}
	return a, b, true
}

// AgeNotRecorded is the age band of participants without a recorded age.
const AgeNotRecorded = "age not recorded"

// AgeBand is the age band a participant's subgroup row counts them in: the
// one set of bands (deid.AgeCuts) every page shows.
func AgeBand(age *int) string {
	if age == nil {
		return AgeNotRecorded
	}
	return deid.AgeBand(*age)
}

package demo

import (
	"iter"
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"cohortdesk/cohort"
)

// Durations in Unix milliseconds, the unit of cohort.Samples.
const (
	second int64 = 1000
	minute       = 60 * second
	hour         = 60 * minute
	day          = 24 * hour
)

// Sampling of the synthetic watch. Rest readings come every 3 to 10 minutes
// (5 to 10 asleep), exercise readings every 4 to 6 seconds, and while the
// watch sees an irregular pulse it samples every 1 to 3 minutes. The numbers
// are illustrative choices of ours, in the range consumer watches report.
const (
	tauHR      = float64(25 * minute) // time constant of the slow heart-rate wander
	rrSlot     = 2 * hour             // a beat-interval tachogram is attempted this often
	rrSpan     = 8 * minute           // room a tachogram needs (at most 200 beats of 2 s)
	stepSlot   = 15 * minute          // step counts are reported per quarter hour at rest
	stepMinute = minute               // and per minute during exercise
)

// span is a half-open interval [a, b) of Unix milliseconds.
type span struct{ a, b int64 }

// episode is a ground-truth rhythm episode in Unix milliseconds.
type episode struct {
	a, b int64
	kind EpisodeKind
}

// plan holds one participant's hidden parameters: physiology, habits, and the
// study-level events (silences, episodes) the weekly generator honours.
type plan struct {
	idx      int
	enrolled cohort.Date
	loc      *time.Location
	hasRR    bool

	dataStart, dataEnd int64 // data exists only in [dataStart, dataEnd)
	weeks              int   // complete (or withdrawal-cut) weeks available by today

	restHR, nightDip, dayLift, exBoost, sigma float64
	afRate, afSD                              float64
	onset, sleepLen                           int64 // habitual sleep onset after local midnight, and length
	chargeAt, chargeLen                       int64
	exAt                                      int64 // habitual exercise time after local midnight
	offProb, exProb, rrProb                   float64
	cadence, stepScale, artifact              float64

	silent   []span    // long non-wear: a silence of two weeks or more, or the tail after a participant stops
	episodes []episode // sorted, non-overlapping
}

// basePlan draws participant k's physiology and habits and sets the data
// window from enrolment and today.
func (s *Study) basePlan(k int) plan {
	p := &s.Participants[k]
	r := newRand(s.seed, streamPlan, uint64(k), 0)
	age := float64(p.AgeOn(cohort.DateOf(s.Today.In(p.Loc))))
	maxHR := 208 - 0.7*age // Tanaka 2001 (verified, secondary; see check-values.md)
	pl := plan{
		idx:       k,
		enrolled:  p.Enrolled,
		loc:       p.Loc,
		hasRR:     p.HasRR,
		restHR:    between(r, 56, 78),
		nightDip:  between(r, 6, 12),
		dayLift:   between(r, 4, 10),
		sigma:     between(r, 2.5, 4.5),
		onset:     int64(between(r, 21.75, 23.75) * float64(hour)),
		sleepLen:  int64(between(r, 6.5, 8.5) * float64(hour)),
		chargeAt:  int64(between(r, 7, 21) * float64(hour)),
		chargeLen: int64(between(r, 35, 75) * float64(minute)),
		exAt:      int64(between(r, 8, 18) * float64(hour)),
		offProb:   between(r, 0.01, 0.08),
		exProb:    between(r, 0.15, 0.55),
		rrProb:    between(r, 0.3, 0.5),
		cadence:   between(r, 95, 135),
		stepScale: between(r, 0.6, 1.4),
		artifact:  0.002,
	}
	pl.exBoost = min(between(r, 35, 60), 0.85*maxHR-pl.restHR-pl.dayLift)
	pl.afRate = pl.restHR + between(r, 15, 30)
	pl.afSD = between(r, 11, 17)
	pl.dataStart = p.Enrolled.In(p.Loc).UnixMilli()
	s.setDataEnd(k, &pl)
	return pl
}

// setDataEnd counts the weeks available by today (whole weeks only, cut at a
// withdrawal) and the end of the data.
func (s *Study) setDataEnd(k int, pl *plan) {
	p := &s.Participants[k]
	today := s.Today.UnixMilli()
	limit := int64(math.MaxInt64)
	if !p.Withdrawn.IsZero() {
		limit = p.Withdrawn.In(p.Loc).UnixMilli()
	}
	pl.weeks, pl.dataEnd = 0, pl.dataStart
	for n := range WearWeeks {
		ws, we := cohort.WeekBounds(p.Enrolled, p.Loc, n)
		if we.UnixMilli() > today || ws.UnixMilli() >= limit {
			break
		}
		pl.weeks = n + 1
		pl.dataEnd = min(we.UnixMilli(), limit)
	}
}

// planOf finds the plan of p, by its position when p came from this study and
// by study ID otherwise.
func (s *Study) planOf(p Participant) (*plan, bool) {
	k := p.index
	if k < 0 || k >= len(s.Participants) || s.Participants[k].StudyID != p.StudyID {
		var ok bool
		if k, ok = s.byID[p.StudyID]; !ok {
			return nil, false
		}
	}
	return &s.plans[k], true
}

// WeekCount is the number of study weeks of wear data p has by today: at most
// WearWeeks, only weeks that have ended, and none that start after a
// withdrawal. Weeks inside a long silence count; they are simply empty.
func (s *Study) WeekCount(p Participant) int {
	pl, ok := s.planOf(p)
	if !ok {
		return 0
	}
	return pl.weeks
}

// Weeks yields p's weeks of wear data in order, generating each on demand.
// Each yielded Week owns its slices.
func (s *Study) Weeks(p Participant) iter.Seq[cohort.Week] {
	return func(yield func(cohort.Week) bool) {
		pl, ok := s.planOf(p)
		if !ok {
			return
		}
		for n := range pl.weeks {
			if !yield(s.genWeek(pl, n)) {
				return
			}
		}
	}
}

// Week generates study week n of p; ok is false when p has no such week.
func (s *Study) Week(p Participant, n int) (w cohort.Week, ok bool) {
	pl, ok := s.planOf(p)
	if !ok || n < 0 || n >= pl.weeks {
		return cohort.Week{}, false
	}
	return s.genWeek(pl, n), true
}

// Readings counts all readings of a week.
func Readings(w *cohort.Week) int { return w.HR.Len() + w.Steps.Len() + w.RR.Len() }

// dayPlan is one calendar day of habits: the sleep that starts this evening,
// whether the watch stays off all day, when it charges, and an exercise bout.
type dayPlan struct {
	start, next int64
	sleep       span
	off         bool
	charge      span
	ex          span // zero when the day has no bout
}

// dayOf draws study day d from a key of its own, so neighbouring weeks agree
// on the night that crosses their boundary.
func (s *Study) dayOf(pl *plan, d int) dayPlan {
	dp := dayPlan{
		start: pl.enrolled.AddDays(d).In(pl.loc).UnixMilli(),
		next:  pl.enrolled.AddDays(d + 1).In(pl.loc).UnixMilli(),
	}
	h := key(s.seed, streamDay, uint64(pl.idx), uint64(int64(d)))
	var u [11]float64
	for i := range u {
		h = mix(h)
		u[i] = unit(h)
	}
	onset := pl.onset + int64((u[0]+u[1]+u[2]-1.5)*40*float64(minute))
	length := pl.sleepLen + int64((u[3]+u[4]-1)*60*float64(minute))
	dp.sleep = span{dp.start + onset, dp.start + onset + length}
	dp.off = u[5] < pl.offProb
	ca := dp.start + pl.chargeAt + int64((u[6]-0.5)*float64(hour))
	dp.charge = span{ca, ca + pl.chargeLen + int64(u[7]*30*float64(minute))}
	if u[8] < pl.exProb {
		ea := dp.start + pl.exAt + int64((u[9]-0.5)*3*float64(hour))
		dp.ex = span{ea, ea + 20*minute + int64(u[10]*40*float64(minute))}
	}
	return dp
}

// weekGen holds the state of one participant-week while it is generated.
type weekGen struct {
	pl         *plan
	r          *rand.Rand
	ws, end    int64
	sleep, ex  []span
	nonwear    []span
	eps        []episode
	scratch    [8]dayPlan
	spanBuffer [24]span
}

// genWeek builds week n of a plan: first the week's timeline (sleep, exercise,
// non-wear, episodes), then the three series from it.
func (s *Study) genWeek(pl *plan, n int) cohort.Week {
	ws, we := cohort.WeekBounds(pl.enrolled, pl.loc, n)
	w := cohort.Week{Week: n, Start: ws.UnixMilli(), End: we.UnixMilli()}
	g := &weekGen{pl: pl, r: newRand(s.seed, streamWeek, uint64(pl.idx), uint64(n)), ws: w.Start, end: min(w.End, pl.dataEnd)}
	if g.end <= g.ws {
		return w
	}
	for _, e := range pl.episodes {
		if e.b > g.ws && e.a < g.end {
			g.eps = append(g.eps, e)
		}
	}
	days := g.scratch[:]
	for i := range days {
		days[i] = s.dayOf(pl, 7*n-1+i)
	}
	g.sleep = make([]span, 0, len(days))
	for _, dp := range days {
		g.sleep = append(g.sleep, dp.sleep)
	}
	g.nonwear = g.spanBuffer[:0]
	for i := 1; i < len(days); i++ {
		dp := days[i]
		if dp.off {
			g.nonwear = append(g.nonwear, span{dp.start, dp.next})
			continue
		}
		g.nonwear = append(g.nonwear, dp.charge)
		x := dp.ex
		if x.b > x.a && x.a > days[i-1].sleep.b+30*minute && x.b < dp.sleep.a-30*minute && !g.inEpisode(x) {
			g.ex = append(g.ex, x)
		}
	}
	for _, q := range pl.silent {
		if q.b > g.ws && q.a < g.end {
			g.nonwear = append(g.nonwear, span{q.a, min(q.b, g.end)})
		}
	}
	g.nonwear = mergeSpans(g.nonwear)

	w.HR = cohort.Samples{T: make([]int64, 0, 2600), V: make([]int32, 0, 2600)}
	g.heartRate(&w.HR)
	w.Steps = cohort.Samples{T: make([]int64, 0, 700), V: make([]int32, 0, 700), End: make([]int64, 0, 700)}
	g.steps(&w.Steps)
	if pl.hasRR {
		w.RR = cohort.Samples{T: make([]int64, 0, 6000), V: make([]int32, 0, 6000)}
		g.beats(&w.RR)
	}
	return w
}

// inEpisode reports whether x overlaps any episode of the week; nobody
// exercises through an AF episode in this demo, which keeps exercise from
// hiding the episodes.
func (g *weekGen) inEpisode(x span) bool {
	for _, e := range g.eps {
		if e.a < x.b+30*minute && e.b > x.a-30*minute {
			return true
		}
	}
	return false
}

// mergeSpans sorts spans and joins overlapping ones.
func mergeSpans(xs []span) []span {
	slices.SortFunc(xs, func(a, b span) int {
		switch {
		case a.a < b.a:
			return -1
		case a.a > b.a:
			return 1
		}
		return 0
	})
	out := xs[:0]
	for _, x := range xs {
		if n := len(out); n > 0 && x.a <= out[n-1].b {
			out[n-1].b = max(out[n-1].b, x.b)
			continue
		}
		out = append(out, x)
	}
	return out
}

// overlaps reports whether [a, b) meets any of xs.
func overlaps(xs []span, a, b int64) bool {
	for _, x := range xs {
		if x.a < b && x.b > a {
			return true
		}
	}
	return false
}

// heartRate walks the week with irregular steps. In sinus rhythm the value is
// a level (asleep, awake, exercising, recovering) plus a slow random wander
// whose correlation decays with the time between readings, plus a little
// measurement noise, so successive readings differ by a few beats per minute.
// During an AF episode each reading is drawn independently around a raised
// rate, so successive readings jump by ten or more; during an ectopy episode a
// share of readings drop (beats too weak to feel at the wrist).
func (g *weekGen) heartRate(out *cohort.Samples) {
	pl, r := g.pl, g.r
	t := g.ws + r.Int64N(3*minute)
	dev := r.NormFloat64() * pl.sigma
	last := t
	var iN, iS, iX, iE int
	for t < g.end {
		for iN < len(g.nonwear) && g.nonwear[iN].b <= t {
			iN++
		}
		if iN < len(g.nonwear) && g.nonwear[iN].a <= t {
			t = g.nonwear[iN].b + r.Int64N(2*minute)
			continue
		}
		for iS < len(g.sleep) && g.sleep[iS].b <= t {
			iS++
		}
		for iX < len(g.ex) && g.ex[iX].b <= t {
			iX++
		}
		for iE < len(g.eps) && g.eps[iE].b <= t {
			iE++
		}
		asleep := iS < len(g.sleep) && g.sleep[iS].a <= t
		inEx := iX < len(g.ex) && g.ex[iX].a <= t
		var kind EpisodeKind
		if iE < len(g.eps) && g.eps[iE].a <= t {
			kind = g.eps[iE].kind
		}
		phi, keep := decay(float64(t-last) / tauHR)
		dev = phi*dev + keep*pl.sigma*r.NormFloat64()
		last = t
		level := pl.restHR + pl.dayLift
		if asleep {
			level = pl.restHR - pl.nightDip
		}
		var v float64
		var gap int64
		switch {
		case kind == EpisodeAF:
			v = pl.afRate + pl.afSD*r.NormFloat64()
			if asleep {
				v -= pl.nightDip / 2
			}
			gap = minute + r.Int64N(2*minute+1)
		case inEx:
			ramp := min(1, float64(t-g.ex[iX].a)/float64(3*minute))
			v = level + pl.exBoost*ramp + dev + 0.8*r.NormFloat64()
			gap = 4*second + r.Int64N(2*second+1)
		default:
			v = level + dev + 0.8*r.NormFloat64()
			if iX > 0 {
				if since := t - g.ex[iX-1].b; since < 20*minute {
					v += pl.exBoost * math.Exp(-float64(since)/float64(2*minute))
				}
			}
			switch {
			case kind == EpisodeEctopy:
				if r.Float64() < 0.35 {
					v *= 0.55 + 0.15*r.Float64()
				}
				gap = 2*minute + r.Int64N(3*minute+1)
			case asleep:
				gap = 5*minute + r.Int64N(5*minute+1)
			default:
				gap = 3*minute + r.Int64N(7*minute+1)
			}
			if kind == "" && r.Float64() < pl.artifact {
				// A motion artefact: one reading far off, then back.
				v += math.Copysign(15+20*r.Float64(), r.Float64()-0.4)
			}
		}
		out.Append(t, int32(max(30, min(220, math.Round(v)))))
		next := t + gap
		if iX < len(g.ex) && g.ex[iX].a > t && g.ex[iX].a < next {
			next = g.ex[iX].a + r.Int64N(5*second)
		}
		if iE < len(g.eps) {
			e := g.eps[iE]
			if e.a > t && e.a < next {
				next = e.a + r.Int64N(30*second)
			} else if e.a <= t && e.b < next {
				next = e.b + r.Int64N(30*second)
			}
		}
		t = next
	}
}

// decay returns exp(-x) and sqrt(1 - exp(-2x)), the weights of an AR(1)
// step over a gap of x time constants. Most gaps are exercise readings a few
// seconds apart (x below 0.01), where short Taylor series (relative error
// below 1e-6) are cheaper than math.Exp.
func decay(x float64) (phi, keep float64) {
	if x < 0.01 {
		phi = 1 - x*(1-x*(0.5-x/6))
		// 1 - exp(-2x) = 2x - 2x^2 + 4x^3/3 - ...
		return phi, math.Sqrt(2 * x * (1 - x*(1-2*x/3)))
	}
	phi = math.Exp(-x)
	return phi, math.Sqrt(1 - phi*phi)
}

// steps reports counts per quarter hour while awake and per minute around an
// exercise bout; zero counts are not reported, as watches skip them, and a
// quarter hour that the watch was off for any part of is not reported at all.
func (g *weekGen) steps(out *cohort.Samples) {
	pl, r := g.pl, g.r
	var iN, iS, iX, iE int
	for q := g.ws; q+stepSlot <= g.end; q += stepSlot {
		qe := q + stepSlot
		for iN < len(g.nonwear) && g.nonwear[iN].b <= q {
			iN++
		}
		if iN < len(g.nonwear) && g.nonwear[iN].a < qe {
			continue
		}
		mid := q + stepSlot/2
		for iS < len(g.sleep) && g.sleep[iS].b <= mid {
			iS++
		}
		for iX < len(g.ex) && g.ex[iX].b <= q {
			iX++
		}
		for iE < len(g.eps) && g.eps[iE].b <= mid {
			iE++
		}
		if iX < len(g.ex) && g.ex[iX].a < qe {
			x := g.ex[iX]
			for m := q; m < qe; m += stepMinute {
				c := 0
				if mm := m + stepMinute/2; mm >= x.a && mm < x.b {
					c = int(pl.cadence + 8*r.NormFloat64())
				} else if r.Float64() < 0.3 {
					c = r.IntN(25)
				}
				if c > 0 {
					out.AppendInterval(m, m+stepMinute, int32(c))
				}
			}
			continue
		}
		if iS < len(g.sleep) && g.sleep[iS].a <= mid {
			if r.Float64() < 0.04 {
				out.AppendInterval(q, qe, int32(5+r.IntN(30)))
			}
			continue
		}
		var c float64
		if r.Float64() < 0.2 {
			c = 250 + 900*r.Float64()
		} else {
			c = 40 * r.ExpFloat64()
		}
		if iE < len(g.eps) && g.eps[iE].a <= mid {
			c *= 0.3
		}
		if n := int32(c * pl.stepScale); n > 0 {
			out.AppendInterval(q, qe, n)
		}
	}
}

// beats makes the beat-interval tachograms of watches that supply them: every
// two hours, when the wearer is still, 130 to 200 consecutive beats. Sinus
// rhythm shows a breathing-rate swing of a few percent; AF gives independent,
// widely spread intervals; ectopy gives early beats each followed by a pause.
func (g *weekGen) beats(out *cohort.Samples) {
	pl, r := g.pl, g.r
	for slot := g.ws; slot < g.end; slot += rrSlot {
		ts := slot + r.Int64N(15*minute)
		if ts+rrSpan > g.end {
			break
		}
		if r.Float64() >= pl.rrProb || overlaps(g.nonwear, ts, ts+rrSpan) || overlaps(g.ex, ts-10*minute, ts+rrSpan) {
			continue
		}
		asleep := overlaps(g.sleep, ts, ts+1)
		var kind EpisodeKind
		for _, e := range g.eps {
			if e.a <= ts && ts < e.b {
				kind = e.kind
			}
		}
		hr := pl.restHR + pl.dayLift + 2*r.NormFloat64()
		if asleep {
			hr = pl.restHR - pl.nightDip + 2*r.NormFloat64()
		}
		base := 60000 / hr
		amp := between(r, 0.015, 0.045)
		breath := between(r, 3.8, 5.5)
		phase := between(r, 0, 2*math.Pi)
		// The breathing swing sin(2 pi i / breath + phase) is advanced by
		// rotating a unit vector, one rotation per beat.
		sinP, cosP := math.Sincos(phase)
		sinD, cosD := math.Sincos(2 * math.Pi / breath)
		n := 130 + r.IntN(71)
		bt := ts
		prevEarly := false
		for range n {
			var rr float64
			switch kind {
			case EpisodeAF:
				rate := pl.afRate
				if asleep {
					rate -= pl.nightDip / 2
				}
				rr = 60000 / rate * math.Exp(0.22*r.NormFloat64())
			case EpisodeEctopy:
				rr = base * (1 + amp*sinP)
				switch {
				case prevEarly:
					rr *= 1.35
					prevEarly = false
				case r.Float64() < 0.25:
					rr *= 0.65
					prevEarly = true
				}
			default:
				rr = base*(1+amp*sinP) + 8*r.NormFloat64()
				base += 1.5 * r.NormFloat64()
			}
			sinP, cosP = sinP*cosD+cosP*sinD, cosP*cosD-sinP*sinD
			rr = max(280, min(2000, math.Round(rr)))
			bt += int64(rr)
			out.Append(bt, int32(rr))
		}
	}
}

package screen

import (
	"fmt"
	"strconv"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/cohort/rr"
)

// Verdict is the outcome of screening one participant-week.
type Verdict string

// The three verdicts. Stored as text, so the values never change.
const (
	Positive     Verdict = "positive"
	Negative     Verdict = "negative"
	Insufficient Verdict = "insufficient"
)

// Label is the verdict's word on pages, summaries and reports: the stored
// word itself; "" (a week not screened) stays "", another value is quoted.
func (v Verdict) Label() string {
	switch v {
	case Positive, Negative, Insufficient, "":
		return string(v)
	}
	return strconv.Quote(string(v))
}

// ParseVerdict reads a verdict word in any letter case, with surrounding
// spaces ignored, as files from other algorithms write it.
func ParseVerdict(s string) (Verdict, error) {
	switch v := Verdict(strings.ToLower(strings.TrimSpace(s))); v {
	case Positive, Negative, Insufficient:
		return v, nil
	}
	return "", fmt.Errorf("unknown verdict %q (want positive, negative or insufficient)", s)
}

// Result is the screen's outcome for one participant-week under one protocol.
// The caller stores the protocol version beside it; InputDigest pins the
// readings, so the result can be recomputed and compared byte for byte.
type Result struct {
	// Week is the study week number (0-based from enrolment).
	Week int `json:"week"`
	// Verdict is positive, negative or insufficient.
	Verdict Verdict `json:"verdict"`
	// Reason says in plain words what decided the verdict, with the figures.
	Reason string `json:"reason"`
	// WearHours is the usable wear of the week: the largest, over window
	// sizes, of the hours covered by that size's usable windows, or the hours
	// of RR intervals inside analysed segments when the RR method is on. The
	// largest rather than a sum because each measures the same wear.
	WearHours float64 `json:"wear_hours"`
	// Windows holds the figures of each window size, in protocol order.
	Windows []WindowResult `json:"windows"`
	// RR holds the beat-interval figures; nil when the method is off.
	RR *RRResult `json:"rr,omitempty"`
	// Baseline says how personal baselines were used; nil when they are off.
	Baseline *BaselineUse `json:"baseline,omitempty"`
	// Clean accounts for every reading given to Screen.
	Clean CleanCounts `json:"clean"`
	// InputDigest is InputDigest of the cleaned readings.
	InputDigest string `json:"input_digest"`
}

// WindowResult holds the figures of one window size over a week. Every window
// is counted in exactly one of Empty, TooFew, Gappy, Active and Usable, tested
// in that order.
type WindowResult struct {
	// Minutes is the window size.
	Minutes int `json:"minutes"`
	// Threshold is the MASD threshold applied (bpm), after any baseline.
	Threshold float64 `json:"threshold"`
	// BaselineLevel is the participant's baseline MASD level when a baseline
	// was applied, else 0.
	BaselineLevel float64 `json:"baseline_level"`
	// Windows is the number of windows in the week (2016 five-minute
	// windows in a 168-hour week).
	Windows int `json:"windows"`
	// Empty windows have no reading.
	Empty int `json:"empty"`
	// TooFew windows have readings, but fewer than min_readings.
	TooFew int `json:"too_few"`
	// Gappy windows have a gap above max_gap_seconds between readings.
	Gappy int `json:"gappy"`
	// Active windows have more steps than max_steps.
	Active int `json:"active"`
	// Usable windows passed every test above.
	Usable int `json:"usable"`
	// Irregular counts usable windows with MASD at or above Threshold.
	Irregular int `json:"irregular"`
	// LongestRun is the longest stretch of windows adjacent in time that are
	// all irregular; any window that is not irregular, usable or not, ends a
	// run.
	LongestRun int `json:"longest_run"`
	// Share is Irregular / Usable, 0 when no window is usable.
	Share float64 `json:"share"`
	// MeanMASD and MedianMASD summarise the usable windows (bpm); the
	// median feeds personal baselines.
	MeanMASD   float64 `json:"mean_masd"`
	MedianMASD float64 `json:"median_masd"`
	// UsableHours is the usable wear this window size sees. Under
	// Protocol.Revision 1 it is the time the readings of usable windows
	// cover: from each usable window's first reading to its last, plus the
	// time from one usable window's last reading to the next window's first
	// when that window is usable too and the gap is within max_gap_seconds.
	// Under revision 0 (the first screen) it was the whole length of every
	// usable window (the last window of a week may be shorter), which
	// counts a window as worn even where its readings cover part of it.
	UsableHours float64 `json:"usable_hours"`
	// RunMet and ShareMet say which criterion of this size made the week
	// positive; both false unless the week had enough wear.
	RunMet   bool `json:"run_met"`
	ShareMet bool `json:"share_met"`
}

// RRResult holds the beat-interval figures of a week.
type RRResult struct {
	// Beats is the number of cleaned RR intervals.
	Beats int `json:"beats"`
	// Runs is the number of unbroken runs of consecutive beats; segments
	// never span two runs.
	Runs int `json:"runs"`
	// Hours is the time covered by the analysed segments.
	Hours float64 `json:"hours"`
	// Summary counts segments and AF-like segments (under this protocol's
	// thresholds) and averages the metrics; inline in JSON.
	rr.Summary
	// Met says the AF-like segment count reached the protocol's minimum in a
	// week with enough wear.
	Met bool `json:"met"`
}

// BaselineUse records how a personal baseline entered a week's verdict.
type BaselineUse struct {
	// Status is one of "baseline_week" (this week is part of the baseline;
	// absolute thresholds), "applied", "not_established" (too few negative
	// baseline weeks; absolute thresholds) or "not_supplied" (the caller gave
	// none; absolute thresholds).
	Status string `json:"status"`
	// Weeks is the number of negative baseline weeks the baseline rests on.
	Weeks int `json:"weeks"`
}

// Prepared is a cleaned week reduced to window summaries and scored RR
// segments: everything the verdict needs, without the readings. Preparing is
// the costly step; Evaluate and Sweep then re-threshold cheaply.
type Prepared struct {
	week       int
	start, end int64
	minutes    []int
	windows    [][]WindowSummary
	rrOn       bool
	rrShape    rrShape
	rrBeats    int
	rrRuns     int
	rrHours    float64
	segments   []rr.Segment
}

// rrShape holds the RR parameters that change the scored segments themselves.
type rrShape struct {
	segmentBeats, bins, trim, joinMs int
	exactBins                        bool
}

func shapeOf(p Protocol) rrShape {
	return rrShape{p.RR.SegmentBeats, p.RR.Bins, p.RR.Trim, p.RR.MaxJoinErrorMs, p.RRParams().ExactBins}
}

// Week is the study week number of the prepared week.
func (pr *Prepared) Week() int { return pr.week }

// Summaries returns the window summaries of the i-th window size (protocol
// order), for charts of the MASD distribution; the caller must not modify them.
func (pr *Prepared) Summaries(i int) []WindowSummary { return pr.windows[i] }

// Prepare reduces a cleaned week (see Clean) to window summaries for every
// window size of p and, when the RR method is on, scored RR segments. RR
// intervals are split into runs of consecutive beats: beat i continues the run
// of beat i-1 when the time between them differs from interval i by at most
// rr.max_join_error_ms; each run is cut into segments of rr.segment_beats and
// its short tail is ignored. p is assumed valid.
func Prepare(w *cohort.Week, p Protocol) *Prepared {
	pr := &Prepared{
		week:    w.Week,
		start:   w.Start,
		end:     w.End,
		minutes: make([]int, len(p.Windows)),
		windows: make([][]WindowSummary, len(p.Windows)),
		rrOn:    p.RR.Enabled,
		rrShape: shapeOf(p),
	}
	for i, r := range p.Windows {
		pr.minutes[i] = r.Minutes
		pr.windows[i] = SummariseWindows(nil, w, r.Minutes)
	}
	if p.RR.Enabled {
		pr.scoreRR(&w.RR, p)
	}
	return pr
}

func (pr *Prepared) scoreRR(s *cohort.Samples, p Protocol) {
	n := min(len(s.T), len(s.V))
	pr.rrBeats = n
	if n == 0 {
		return
	}
	tol := int64(p.RR.MaxJoinErrorMs)
	buf := make([]float64, 0, 1024)
	var totalMs int64
	runStart := 0
	flush := func(end int) {
		pr.rrRuns++
		if end-runStart < p.RR.SegmentBeats {
			return
		}
		buf = buf[:0]
		for _, v := range s.V[runStart:end] {
			buf = append(buf, float64(v))
		}
		first := len(pr.segments)
		pr.segments = rr.AppendAnalyse(pr.segments, buf, p.RRParams())
		for k := first; k < len(pr.segments); k++ {
			seg := &pr.segments[k]
			for _, v := range s.V[runStart+seg.Start : runStart+seg.Start+p.RR.SegmentBeats] {
				totalMs += int64(v)
			}
			seg.Start += runStart
		}
	}
	for i := 1; i < n; i++ {
		d := s.T[i] - s.T[i-1] - int64(s.V[i])
		if d < -tol || d > tol {
			flush(i)
			runStart = i
		}
	}
	flush(n)
	pr.rrHours = float64(totalMs) / 3.6e6
}

// Screen cleans one participant-week, reduces it and returns its result under
// p. now (Unix ms) is the moment of screening: readings after it are dropped as
// future. base is the participant's baseline (see NewBaseline) or nil; screen
// the baseline weeks themselves with nil.
func Screen(w *cohort.Week, p Protocol, now int64, base *Baseline) (Result, error) {
	if err := p.Validate(); err != nil {
		return Result{}, fmt.Errorf("screen: protocol: %w", err)
	}
	if err := checkWeek(w); err != nil {
		return Result{}, err
	}
	cleaned, counts := Clean(w, p, now)
	res, err := Evaluate(Prepare(&cleaned, p), p, base)
	if err != nil {
		return Result{}, err
	}
	res.Clean = counts
	res.InputDigest = InputDigest(&cleaned)
	return res, nil
}

func checkWeek(w *cohort.Week) error {
	if w.End <= w.Start {
		return fmt.Errorf("screen: week %d: end %d is not after start %d", w.Week, w.End, w.Start)
	}
	if w.End-w.Start > MaxWeekMs {
		return fmt.Errorf("screen: week %d: %d ms long, more than the %d ms a week can span", w.Week, w.End-w.Start, int64(MaxWeekMs))
	}
	return nil
}

// Evaluate decides the verdict of a prepared week under p, which must have
// the window sizes and RR segment shape the week was prepared with. Clean and
// InputDigest are left empty; Screen fills them.
func Evaluate(pr *Prepared, p Protocol, base *Baseline) (Result, error) {
	return evaluate(pr, p, base, true)
}

func (pr *Prepared) compatible(p Protocol) error {
	if len(pr.minutes) != len(p.Windows) {
		return fmt.Errorf("screen: week %d was prepared with %d window sizes, the protocol has %d", pr.week, len(pr.minutes), len(p.Windows))
	}
	for i, m := range pr.minutes {
		if p.Windows[i].Minutes != m {
			return fmt.Errorf("screen: week %d: windows[%d] was prepared with %d minutes, the protocol has %d", pr.week, i, m, p.Windows[i].Minutes)
		}
	}
	if p.RR.Enabled && (!pr.rrOn || pr.rrShape != shapeOf(p)) {
		return fmt.Errorf("screen: week %d: RR segments were prepared with other segment_beats, bins, trim, max_join_error_ms or revision", pr.week)
	}
	return nil
}

// evaluate is Evaluate; full=false skips the medians and the reason, which
// Sweep does not need.
func evaluate(pr *Prepared, p Protocol, base *Baseline, full bool) (Result, error) {
	if err := pr.compatible(p); err != nil {
		return Result{}, err
	}
	res := Result{Week: pr.week, Windows: make([]WindowResult, len(p.Windows))}

	thresholds, use, err := baselineThresholds(pr.week, p, base)
	if err != nil {
		return Result{}, err
	}
	res.Baseline = use

	var scratch []float64
	for i, r := range p.Windows {
		th := r.MASDThreshold
		if thresholds != nil {
			th = thresholds[i]
		}
		wr, s := evalRule(pr.windows[i], r, th, pr.start, pr.end, p.Revision >= 1, scratch, full)
		scratch = s
		if use != nil && use.Status == "applied" {
			wr.BaselineLevel = base.Level[i]
		}
		res.Windows[i] = wr
		res.WearHours = max(res.WearHours, wr.UsableHours)
	}
	if p.RR.Enabled {
		rres := &RRResult{Beats: pr.rrBeats, Runs: pr.rrRuns, Hours: pr.rrHours}
		rres.Summary = rr.Summarise(pr.segments)
		rres.AFLike = 0
		for _, s := range pr.segments {
			if p.RR.Params.AFLike(s) {
				rres.AFLike++
			}
		}
		res.RR = rres
		res.WearHours = max(res.WearHours, pr.rrHours)
	}

	res.Verdict = Insufficient
	if res.WearHours >= p.MinWearHours {
		res.Verdict = Negative
		for i, r := range p.Windows {
			wr := &res.Windows[i]
			wr.RunMet = r.RunLength > 0 && wr.LongestRun >= r.RunLength
			wr.ShareMet = r.MinShare > 0 && wr.UsableHours >= p.MinWearHours && wr.Share >= r.MinShare
			if wr.RunMet || wr.ShareMet {
				res.Verdict = Positive
			}
		}
		if res.RR != nil && res.RR.AFLike >= p.RR.MinAFLikeSegments {
			res.RR.Met = true
			res.Verdict = Positive
		}
	}
	if full {
		res.Reason = reason(&res, p, base)
	}
	return res, nil
}

// evalRule classifies every window of one size; covered measures usable
// wear as the time the readings cover (revision 1) rather than whole
// windows. scratch is reused for the median; it is returned so the caller
// can pass it on.
func evalRule(sums []WindowSummary, r WindowRule, th float64, start, end int64, covered bool, scratch []float64, full bool) (WindowResult, []float64) {
	wr := WindowResult{Minutes: r.Minutes, Threshold: th, Windows: len(sums)}
	minN := int32(r.MinReadings)
	maxGap := int64(r.MaxGapSeconds) * 1000
	maxSteps := float64(r.MaxSteps)
	l := int64(r.Minutes) * 60000
	scratch = scratch[:0]
	var sumMASD float64
	var coveredMs, prevLast int64
	prevUsable := false
	run := 0
	for wi, s := range sums {
		usable := false
		switch {
		case s.N == 0:
			wr.Empty++
		case s.N < minN:
			wr.TooFew++
		case int64(s.MaxGap) > maxGap:
			wr.Gappy++
		case s.Steps > maxSteps:
			wr.Active++
		default:
			usable = true
		}
		if !usable {
			prevUsable = false
			run = 0
			continue
		}
		ws := start + int64(wi)*l
		first, last := ws+int64(s.First), ws+int64(s.Last)
		coveredMs += last - first
		if prevUsable && first-prevLast <= maxGap {
			coveredMs += first - prevLast
		}
		prevUsable, prevLast = true, last
		wr.Usable++
		masd := s.MASD()
		sumMASD += masd
		if full {
			scratch = append(scratch, masd)
		}
		if masd >= th {
			wr.Irregular++
			run++
			wr.LongestRun = max(wr.LongestRun, run)
			continue
		}
		run = 0
	}
	usableMs := coveredMs
	if !covered {
		usableMs = int64(wr.Usable) * l
		if n := len(sums); n > 0 {
			if last := sums[n-1]; wr.Usable > 0 && isUsable(last, minN, maxGap, maxSteps) {
				usableMs -= start + int64(n)*l - end // the last window may be short
			}
		}
	}
	wr.UsableHours = float64(usableMs) / 3.6e6
	if wr.Usable > 0 {
		wr.Share = float64(wr.Irregular) / float64(wr.Usable)
		wr.MeanMASD = sumMASD / float64(wr.Usable)
		if full {
			wr.MedianMASD = median(scratch)
		}
	}
	return wr, scratch
}

func isUsable(s WindowSummary, minN int32, maxGap int64, maxSteps float64) bool {
	return s.N > 0 && s.N >= minN && int64(s.MaxGap) <= maxGap && s.Steps <= maxSteps
}

// median reorders x and returns its median (mean of the middle two for an even
// count), in linear expected time, since a sort would cost more than the whole
// window pass.
func median(x []float64) float64 {
	n := len(x)
	if n == 0 {
		return 0
	}
	k := (n - 1) / 2
	m := selectKth(x, k)
	if n%2 == 1 {
		return m
	}
	hi := x[k+1]
	for _, v := range x[k+2:] {
		hi = min(hi, v)
	}
	return (m + hi) / 2
}

// selectKth partially orders x so x[k] holds the k-th smallest, everything
// before it is no larger and everything after no smaller. Three-way partitions
// keep it linear when many windows share a MASD value.
func selectKth(x []float64, k int) float64 {
	lo, hi := 0, len(x)-1
	for lo < hi {
		a, b, c := x[lo], x[lo+(hi-lo)/2], x[hi]
		pivot := max(min(a, b), min(max(a, b), c))
		lt, i, gt := lo, lo, hi
		for i <= gt {
			switch v := x[i]; {
			case v < pivot:
				x[lt], x[i] = x[i], x[lt]
				lt++
				i++
			case v > pivot:
				x[i], x[gt] = x[gt], x[i]
				gt--
			default:
				i++
			}
		}
		switch {
		case k < lt:
			hi = lt - 1
		case k > gt:
			lo = gt + 1
		default:
			return pivot
		}
	}
	return x[k]
}

func fmtFloat(x float64, prec int) string { return strconv.FormatFloat(x, 'f', prec, 64) }
func fmtShort(x float64) string           { return strconv.FormatFloat(x, 'g', -1, 64) }

// reason writes the verdict in plain words: what met a criterion, then the
// figures of every method, then how baselines were used.
func reason(res *Result, p Protocol, base *Baseline) string {
	var b strings.Builder
	if res.Verdict == Insufficient {
		b.WriteString("insufficient data: ")
		b.WriteString(fmtFloat(res.WearHours, 1))
		b.WriteString(" h usable wear, needs ")
		b.WriteString(fmtShort(p.MinWearHours))
		b.WriteString(" h")
	} else {
		var met []string
		for i, wr := range res.Windows {
			r := p.Windows[i]
			if wr.RunMet {
				met = append(met, fmt.Sprintf("run of %d irregular %d-minute windows (limit %d)", wr.LongestRun, wr.Minutes, r.RunLength))
			}
			if wr.ShareMet {
				met = append(met, fmt.Sprintf("%s%% of usable %d-minute windows irregular (limit %s%%)", fmtFloat(100*wr.Share, 1), wr.Minutes, fmtShort(100*r.MinShare)))
			}
		}
		if res.RR != nil && res.RR.Met {
			met = append(met, fmt.Sprintf("%d AF-like RR segments (limit %d)", res.RR.AFLike, p.RR.MinAFLikeSegments))
		}
		if len(met) > 0 {
			b.WriteString("positive by ")
			b.WriteString(strings.Join(met, " and "))
		} else {
			b.WriteString("no criterion met")
		}
		b.WriteString(" in ")
		b.WriteString(fmtFloat(res.WearHours, 1))
		b.WriteString(" h usable wear")
	}
	for _, wr := range res.Windows {
		fmt.Fprintf(&b, "; %d of %d usable %d-minute windows irregular; longest run %d", wr.Irregular, wr.Usable, wr.Minutes, wr.LongestRun)
	}
	if res.RR != nil && res.RR.Beats > 0 {
		fmt.Fprintf(&b, "; %d of %d RR segments AF-like", res.RR.AFLike, res.RR.Segments)
	}
	if u := res.Baseline; u != nil {
		switch u.Status {
		case "baseline_week":
			fmt.Fprintf(&b, "; baseline week (weeks 0-%d): absolute thresholds", p.Baseline.Weeks-1)
		case "not_supplied":
			b.WriteString("; no baseline supplied: absolute thresholds")
		case "not_established":
			fmt.Fprintf(&b, "; baseline not established (%d of %d baseline weeks negative): absolute thresholds", u.Weeks, p.Baseline.Weeks)
		case "applied":
			parts := make([]string, len(res.Windows))
			for i, wr := range res.Windows {
				if wr.Threshold > p.Windows[i].MASDThreshold {
					parts[i] = fmt.Sprintf("%d-minute %s bpm (baseline %s x %s)", wr.Minutes, fmtFloat(wr.Threshold, 2), fmtFloat(base.Level[i], 2), fmtShort(p.Baseline.Factor))
				} else {
					parts[i] = fmt.Sprintf("%d-minute %s bpm (absolute)", wr.Minutes, fmtShort(wr.Threshold))
				}
			}
			b.WriteString("; personal thresholds: ")
			b.WriteString(strings.Join(parts, ", "))
		}
	}
	return b.String()
}

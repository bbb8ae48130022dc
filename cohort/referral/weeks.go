package referral

import (
	"fmt"
	"slices"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
)

// HRBinMinutes is the width of a bin of the heart-rate chart (ours).
const HRBinMinutes = 10

// irregularity orders weeks for MostIrregular: the largest share of
// irregular windows over the window sizes, then the irregular windows, then
// the AF-like beat-interval segments.
type irregularity struct {
	share     float64
	irregular int
	afLike    int
}

func irregularityOf(r screen.Result) irregularity {
	var x irregularity
	for _, w := range r.Windows {
		x.share = max(x.share, w.Share)
		x.irregular += w.Irregular
	}
	if r.RR != nil {
		x.afLike = r.RR.AFLike
	}
	return x
}

func (x irregularity) above(y irregularity) bool {
	switch {
	case x.share != y.share:
		return x.share > y.share
	case x.irregular != y.irregular:
		return x.irregular > y.irregular
	}
	return x.afLike > y.afLike
}

// MostIrregular returns the index of the week whose result is most
// irregular (see irregularity), the earliest of equals; -1 for none.
func MostIrregular(weeks []Week) int {
	best := -1
	var bx irregularity
	for i, w := range weeks {
		x := irregularityOf(w.Result)
		if best < 0 || x.above(bx) {
			best, bx = i, x
		}
	}
	return best
}

func weekView(w Week, most bool) WeekView {
	v := WeekView{StudyWeek: w.Week, FirstDay: 7 * w.Week, LastDay: 7*w.Week + 6, Verdict: w.Verdict.Label(), Reason: w.Reason,
		WearHours: round(w.WearHours, 1), MostIrregular: most}
	for _, wr := range w.Result.Windows {
		v.Metrics = append(v.Metrics, Metric{
			Label: fmt.Sprintf("%d-minute windows", wr.Minutes),
			Value: fmt.Sprintf("%d of %d usable irregular (%.1f%%), longest run %d, mean MASD %.1f bpm",
				wr.Irregular, wr.Usable, 100*wr.Share, wr.LongestRun, wr.MeanMASD),
		})
	}
	if r := w.Result.RR; r != nil && r.Segments > 0 {
		v.Metrics = append(v.Metrics, Metric{Label: "beat-interval segments",
			Value: fmt.Sprintf("%d of %d AF-like", r.AFLike, r.Segments)})
	}
	return v
}

// heartRate bins the week's heart-rate readings and marks the irregular
// windows of the window size with the largest irregular share.
func heartRate(w *cohort.Week, wk Week, p Protocol, issued time.Time) *HeartRateView {
	minutes := int((w.End - w.Start) / 60000)
	h := &HeartRateView{StudyWeek: w.Week, FirstStudyDay: 7 * w.Week, Minutes: minutes, BinMinutes: HRBinMinutes}
	byBin := map[int]*HRBin{}
	var order []int
	for i, t := range w.HR.T {
		if t < w.Start || t >= w.End {
			continue
		}
		v := int(w.HR.V[i])
		if p.ParamsOK && (int32(v) < p.Params.MinBPM || int32(v) > p.Params.MaxBPM) {
			continue // implausible readings the screen dropped too
		}
		m := int((t - w.Start) / 60000)
		k := m / HRBinMinutes
		b, ok := byBin[k]
		if !ok {
			b = &HRBin{Minute: k * HRBinMinutes, Min: v, Max: v}
			byBin[k] = b
			order = append(order, k)
		}
		b.Min, b.Max = min(b.Min, v), max(b.Max, v)
		h.Readings++
	}
	slices.Sort(order)
	for _, k := range order {
		h.Bins = append(h.Bins, *byBin[k])
	}
	if !p.ParamsOK || len(wk.Result.Windows) != len(p.Params.Windows) {
		return h
	}
	best := -1
	for i, wr := range wk.Result.Windows {
		if wr.Irregular > 0 && (best < 0 || wr.Share > wk.Result.Windows[best].Share) {
			best = i
		}
	}
	if best < 0 {
		return h
	}
	rule := p.Params.Windows[best]
	threshold := wk.Result.Windows[best].Threshold
	if !(threshold > 0) {
		threshold = rule.MASDThreshold
	}
	cleaned, _ := screen.Clean(w, p.Params, issued.UnixMilli())
	sums := screen.SummariseWindows(nil, &cleaned, rule.Minutes)
	h.WindowMinutes = rule.Minutes
	for i, s := range sums {
		if !irregularWindow(rule, s, threshold) {
			continue
		}
		from, to := i*rule.Minutes, min((i+1)*rule.Minutes, minutes)
		if n := len(h.Irregular); n > 0 && h.Irregular[n-1].To == from {
			h.Irregular[n-1].To = to // adjacent windows draw as one band
			continue
		}
		h.Irregular = append(h.Irregular, Span{From: from, To: to})
	}
	return h
}

// irregularWindow applies the screen's window tests in their order (see
// screen.WindowResult): usable (enough readings, no long gap, not active)
// and at or above the threshold.
func irregularWindow(r screen.WindowRule, s screen.WindowSummary, threshold float64) bool {
	return s.N >= int32(r.MinReadings) && s.N >= 2 && int64(s.MaxGap) <= int64(r.MaxGapSeconds)*1000 &&
		s.Steps <= float64(r.MaxSteps) && s.MASD() >= threshold
}

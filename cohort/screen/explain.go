package screen

import (
	"fmt"
	"strings"
)

// Explain says in plain words why a week got its verdict, for the pages a
// person reads it on: what flagged it, or how far each criterion stayed from
// flagging it, or how much wear was missing. Window sizes that had no usable
// window are left out (nothing was measured there) and said once at the
// end; the figures of every window size stay on the result for the pages
// that list them. Result.Reason, stored with the result, keeps the full
// technical account.
func Explain(res Result, p Protocol) string {
	if res.Verdict == Insufficient {
		return fmt.Sprintf("Not enough wear to judge: %s hours of usable wear, %s needed.", fmtFloat(res.WearHours, 1), fmtShort(p.MinWearHours))
	}
	var met, missed, idle []string
	for i, wr := range res.Windows {
		if i >= len(p.Windows) {
			break
		}
		r := p.Windows[i]
		size := fmt.Sprintf("%d-minute", wr.Minutes)
		if wr.Usable == 0 {
			idle = append(idle, size)
			continue
		}
		if r.RunLength > 0 {
			switch {
			case wr.RunMet:
				met = append(met, fmt.Sprintf("%d irregular %s windows in a row (%d flag a week)", wr.LongestRun, size, r.RunLength))
			case wr.Irregular == 0:
				missed = append(missed, fmt.Sprintf("no irregular %s window (%d in a row would flag it)", size, r.RunLength))
			default:
				missed = append(missed, fmt.Sprintf("at most %d irregular %s %s in a row (%d would flag it)", wr.LongestRun, size, windows(wr.LongestRun), r.RunLength))
			}
		}
		if r.MinShare > 0 && !(wr.Irregular == 0 && r.RunLength > 0) {
			share := fmt.Sprintf("%s%% of the usable %s windows irregular", fmtFloat(100*wr.Share, 0), size)
			if wr.ShareMet {
				met = append(met, fmt.Sprintf("%s (%s%% flag a week)", share, fmtShort(100*r.MinShare)))
			} else {
				missed = append(missed, fmt.Sprintf("%s (%s%% would flag it)", share, fmtShort(100*r.MinShare)))
			}
		}
	}
	if rr := res.RR; rr != nil && rr.Segments > 0 {
		seg := fmt.Sprintf("%d of %d beat segments AF-like", rr.AFLike, rr.Segments)
		if rr.Met {
			met = append(met, fmt.Sprintf("%s (%d flag a week)", seg, p.RR.MinAFLikeSegments))
		} else {
			missed = append(missed, fmt.Sprintf("%s (%d would flag it)", seg, p.RR.MinAFLikeSegments))
		}
	}
	var b strings.Builder
	switch {
	case res.Verdict == Positive && len(met) > 0:
		b.WriteString("Flagged: " + strings.Join(met, "; ") + ".")
	case res.Verdict == Positive:
		b.WriteString("Flagged.")
	case len(missed) > 0:
		b.WriteString("Not flagged: " + strings.Join(missed, "; ") + ".")
	default:
		b.WriteString("Not flagged.")
	}
	fmt.Fprintf(&b, " %s hours of usable wear.", fmtFloat(res.WearHours, 1))
	if len(idle) > 0 {
		fmt.Fprintf(&b, " No usable %s window.", strings.Join(idle, " or "))
	}
	if u := res.Baseline; u != nil && u.Status == "applied" {
		b.WriteString(" Thresholds raised to the participant's own level.")
	}
	return b.String()
}

func windows(n int) string {
	if n == 1 {
		return "window"
	}
	return "windows"
}

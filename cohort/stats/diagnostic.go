package stats

import (
	"fmt"
)

// Table2x2 holds a screen's results against the reference (the over-read):
// TP screen-positive and confirmed, FP screen-positive and not confirmed, FN
// screen-negative but confirmed, TN screen-negative and not confirmed.
type Table2x2 struct {
	TP, FP, FN, TN int // counts of participants (or episodes), never negative
}

// Accuracy is the usual set of diagnostic accuracy measures, each kept as a
// Fraction so its numerator and denominator can be shown and an interval
// computed (Altman DG, Bland JM. Diagnostic tests 1 and 2. BMJ
// 1994;308:1552 and 309:102).
type Accuracy struct {
	Sensitivity Fraction // TP / (TP + FN)
	Specificity Fraction // TN / (TN + FP)
	PPV         Fraction // TP / (TP + FP)
	NPV         Fraction // TN / (TN + FN)
	Prevalence  Fraction // (TP + FN) / all, the prevalence in this sample
}

// Diagnostic computes the accuracy measures of a 2x2 table. A measure whose
// denominator is zero has N = 0 and Value NaN rather than an error, because a
// study early in its life legitimately has, say, no screen-negatives yet.
func Diagnostic(t Table2x2) (Accuracy, error) {
	for _, c := range []struct {
		name string
		v    int
	}{{"TP", t.TP}, {"FP", t.FP}, {"FN", t.FN}, {"TN", t.TN}} {
		if c.v < 0 {
			return Accuracy{}, fmt.Errorf("stats: diagnostic: %s = %d is negative: %w", c.name, c.v, ErrInvalid)
		}
	}
	return Accuracy{
		Sensitivity: Fraction{t.TP, t.TP + t.FN},
		Specificity: Fraction{t.TN, t.TN + t.FP},
		PPV:         Fraction{t.TP, t.TP + t.FP},
		NPV:         Fraction{t.TN, t.TN + t.FN},
		Prevalence:  Fraction{t.TP + t.FN, t.TP + t.FP + t.FN + t.TN},
	}, nil
}

package stats

import (
	"math"
	"testing"
)

// Altman DG, Bland JM. Diagnostic tests 1: sensitivity and specificity. BMJ
// 1994;308:1552 (verified, secondary) and Diagnostic tests 2: predictive
// values. BMJ 1994;309:102 (verified): TP 231, FP 32, FN 27, TN 54.
func TestDiagnosticPublishedExample(t *testing.T) {
	got, err := Diagnostic(Table2x2{TP: 231, FP: 32, FN: 27, TN: 54})
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name string
		got  Fraction
		want Fraction
		val  float64 // as printed, three decimals
	}{
		{"sensitivity", got.Sensitivity, Fraction{231, 258}, 0.895},
		{"specificity", got.Specificity, Fraction{54, 86}, 0.628},
		{"PPV", got.PPV, Fraction{231, 263}, 0.878},
		// The article prints "54/81 = 0.59"; that is an arithmetic slip in
		// the article, 54/81 = 0.667, and we test the correct quotient
		// (check-values.md, verified).
		{"NPV", got.NPV, Fraction{54, 81}, 0.667},
		{"prevalence", got.Prevalence, Fraction{258, 344}, 0.750},
	}
	for _, tt := range tests {
		if tt.got != tt.want {
			t.Errorf("%s = %d/%d, want %d/%d", tt.name, tt.got.X, tt.got.N, tt.want.X, tt.want.N)
		}
		near(t, tt.name, tt.got.Value(), tt.val, 0.0005)
	}
}

func TestDiagnosticEdgesAndErrors(t *testing.T) {
	got, err := Diagnostic(Table2x2{TP: 3, FP: 1})
	if err != nil {
		t.Fatal(err)
	}
	if v := got.NPV.Value(); !math.IsNaN(v) {
		t.Errorf("NPV with no screen-negatives = %v, want NaN", v)
	}
	_, err = Diagnostic(Table2x2{TP: 1, FN: -1})
	wantInvalid(t, "negative FN", err)
}

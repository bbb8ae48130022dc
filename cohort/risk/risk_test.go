package risk

import (
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// base is a 50-year-old man with every answer "no": score 0 on both scores.
func base() Intake {
	return Intake{Age: 50, AgeKnown: true, Sex: cohort.Male,
		HeartFailure: No, Hypertension: No, Diabetes: No, StrokeTIA: No, Vascular: No}
}

// Item weights from Lip GYH et al. Chest 2010;137:263-72 (verified,
// secondary; check-values.md): C 1, H 1, A2 2, D 1, S2 2, V 1, A 1, Sc 1.
// CHA2DS2-VA (2024 ESC AF guidelines; from memory) drops Sc.
func TestScoreItems(t *testing.T) {
	tests := []struct {
		name     string
		change   func(*Intake)
		vasc, va int
		code     string
	}{
		{"none", func(*Intake) {}, 0, 0, ""},
		{"heart failure", func(in *Intake) { in.HeartFailure = Yes }, 1, 1, "C"},
		{"hypertension", func(in *Intake) { in.Hypertension = Yes }, 1, 1, "H"},
		{"age 75", func(in *Intake) { in.Age = 75 }, 2, 2, "A2"},
		{"age 90", func(in *Intake) { in.Age = 90 }, 2, 2, "A2"},
		{"diabetes", func(in *Intake) { in.Diabetes = Yes }, 1, 1, "D"},
		{"stroke/TIA", func(in *Intake) { in.StrokeTIA = Yes }, 2, 2, "S2"},
		{"vascular", func(in *Intake) { in.Vascular = Yes }, 1, 1, "V"},
		{"age 65", func(in *Intake) { in.Age = 65 }, 1, 1, "A"},
		{"age 74", func(in *Intake) { in.Age = 74 }, 1, 1, "A"},
		{"age 64", func(in *Intake) { in.Age = 64 }, 0, 0, ""},
		{"female", func(in *Intake) { in.Sex = cohort.Female }, 1, 0, "Sc"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			in := base()
			tt.change(&in)
			vasc, va := CHA2DS2VASc(in), CHA2DS2VA(in)
			if vasc.Points != tt.vasc || va.Points != tt.va {
				t.Errorf("points = %d, %d; want %d, %d", vasc.Points, va.Points, tt.vasc, tt.va)
			}
			if !vasc.Complete || !va.Complete || vasc.UpperBound != vasc.Points {
				t.Errorf("want complete scores: %+v", vasc)
			}
			if tt.code == "" {
				if len(vasc.Contributed) != 0 {
					t.Errorf("contributed = %+v, want none", vasc.Contributed)
				}
				return
			}
			if len(vasc.Contributed) != 1 || vasc.Contributed[0].Code != tt.code || vasc.Contributed[0].Points != tt.vasc {
				t.Errorf("contributed = %+v, want only %s", vasc.Contributed, tt.code)
			}
		})
	}
}

// Everything present: the maxima 9 and 8 (verified, secondary; from memory
// for CHA2DS2-VA).
func TestScoreMaximum(t *testing.T) {
	in := Intake{Age: 80, AgeKnown: true, Sex: cohort.Female,
		HeartFailure: Yes, Hypertension: Yes, Diabetes: Yes, StrokeTIA: Yes, Vascular: Yes}
	vasc, va := CHA2DS2VASc(in), CHA2DS2VA(in)
	if vasc.Points != 9 || vasc.Max != 9 || va.Points != 8 || va.Max != 8 {
		t.Errorf("maxima = %d/%d and %d/%d, want 9/9 and 8/8", vasc.Points, vasc.Max, va.Points, va.Max)
	}
	var codes []string
	for _, it := range vasc.Contributed {
		codes = append(codes, it.Code)
	}
	if got, want := strings.Join(codes, " "), "C H A2 D S2 V Sc"; got != want {
		t.Errorf("items = %q, want %q", got, want)
	}
	if vasc.Name != "CHA2DS2-VASc" || va.Name != "CHA2DS2-VA" {
		t.Errorf("names %q, %q", vasc.Name, va.Name)
	}
}

// Unknown answers make the score a lower bound, with the range it may span.
func TestScoreUnknown(t *testing.T) {
	in := base()
	in.Hypertension = Yes
	in.Diabetes = Unknown
	in.AgeKnown = false
	in.Sex = cohort.Unknown
	vasc := CHA2DS2VASc(in)
	// Known: H 1. Unknown: D up to 1, age up to 2, sex up to 1.
	if vasc.Complete || vasc.Points != 1 || vasc.UpperBound != 5 || len(vasc.Unknown) != 3 {
		t.Errorf("got %+v, want lower bound 1, upper 5, 3 unknown items", vasc)
	}
	va := CHA2DS2VA(in)
	if va.Complete || va.Points != 1 || va.UpperBound != 4 || len(va.Unknown) != 2 {
		t.Errorf("got %+v, want lower bound 1, upper 4, 2 unknown items", va)
	}
	// The zero Intake knows nothing: 0 to the maximum.
	zero := CHA2DS2VASc(Intake{})
	if zero.Complete || zero.Points != 0 || zero.UpperBound != 9 {
		t.Errorf("zero intake = %+v, want 0 to 9, incomplete", zero)
	}
	// The empty sex string is not a recorded sex.
	if s := CHA2DS2VASc(Intake{Sex: ""}); len(s.Unknown) == 0 {
		t.Error("empty sex must be unknown")
	}
}

// Adjusted annual stroke rate by CHA2DS2-VASc score (verified, secondary;
// check-values.md). Score 8 is 6.7, not the 12.5 of a circulating wrong copy.
func TestAnnualStrokeRate(t *testing.T) {
	want := []float64{0, 1.3, 2.2, 3.2, 4.0, 6.7, 9.8, 9.6, 6.7, 15.2}
	for score, w := range want {
		got, ok := AnnualStrokeRate(score)
		if !ok || got != w {
			t.Errorf("rate(%d) = %v, %v; want %v", score, got, ok, w)
		}
	}
	if got, _ := AnnualStrokeRate(8); got == 12.5 {
		t.Error("score 8 carries the circulating wrong value 12.5")
	}
	for _, bad := range []int{-1, 10} {
		if _, ok := AnnualStrokeRate(bad); ok {
			t.Errorf("rate(%d) ok, want false", bad)
		}
	}
}

func TestAnswerString(t *testing.T) {
	for a, want := range map[Answer]string{Unknown: "unknown", No: "no", Yes: "yes"} {
		if got := a.String(); got != want {
			t.Errorf("%d.String() = %q, want %q", a, got, want)
		}
	}
}

package overread

import (
	"errors"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

var (
	d1 = cohort.Date{Year: 2026, Month: 3, Day: 2}
	d2 = cohort.Date{Year: 2026, Month: 3, Day: 4}
	d3 = cohort.Date{Year: 2026, Month: 3, Day: 9}
)

func rd(role Role, r Rhythm, c Confidence, reader int64, on cohort.Date) Reading {
	return Reading{Role: role, Rhythm: r, Confidence: c, ReaderID: reader, Reader: "reader", On: on}
}

// TestResolve walks the double-reading scheme: the verdict is the single
// reading, the agreed rhythm, or the adjudication; a disagreement has none.
func TestResolve(t *testing.T) {
	for _, tc := range []struct {
		name string
		in   []Reading
		want Conclusion
	}{
		{"none", nil, Conclusion{Status: Unread}},
		{"single", []Reading{rd(First, AF, Certain, 1, d1)}, Conclusion{Status: Single, Final: true, Rhythm: AF, SettledOn: d1}},
		{"single uninterpretable", []Reading{rd(First, Uninterpretable, Certain, 1, d1)},
			Conclusion{Status: Single, Final: true, Rhythm: Uninterpretable, SettledOn: d1}},
		{"agreed, settled on the later day", []Reading{rd(Second, Sinus, Probable, 2, d1), rd(First, Sinus, Certain, 1, d2)},
			Conclusion{Status: Agreed, Final: true, Rhythm: Sinus, SettledOn: d2, ConfidenceDiffers: true}},
		{"disagreed", []Reading{rd(First, AF, Certain, 1, d1), rd(Second, Flutter, Certain, 2, d2)}, Conclusion{Status: Disagreed}},
		{"adjudicated", []Reading{rd(First, AF, Certain, 1, d1), rd(Second, Flutter, Certain, 2, d2), rd(Adjudication, Flutter, Probable, 3, d3)},
			Conclusion{Status: Adjudicated, Final: true, Rhythm: Flutter, SettledOn: d3}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got, err := Resolve(tc.in)
			if err != nil {
				t.Fatal(err)
			}
			if got != tc.want {
				t.Fatalf("got %+v, want %+v", got, tc.want)
			}
		})
	}
}

func TestResolveRefusesImpossibleSets(t *testing.T) {
	for name, in := range map[string][]Reading{
		"second alone":            {rd(Second, AF, Certain, 2, d1)},
		"two firsts":              {rd(First, AF, Certain, 1, d1), rd(First, AF, Certain, 2, d1)},
		"adjudication of agreed":  {rd(First, AF, Certain, 1, d1), rd(Second, AF, Certain, 2, d1), rd(Adjudication, AF, Certain, 3, d1)},
		"adjudication, no second": {rd(First, AF, Certain, 1, d1), rd(Adjudication, AF, Certain, 3, d1)},
		"unknown role":            {{Role: "third", Rhythm: AF}},
	} {
		if _, err := Resolve(in); err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
}

func TestCheckOrderAndReaders(t *testing.T) {
	first := rd(First, AF, Certain, 1, d1)
	second := rd(Second, Sinus, Certain, 2, d2)
	agree := rd(Second, AF, Certain, 2, d2)
	for _, tc := range []struct {
		name     string
		existing []Reading
		next     Reading
		field    string // "" when accepted
	}{
		{"first", nil, first, ""},
		{"second before first", nil, second, "role"},
		{"second", []Reading{first}, second, ""},
		{"second by the first reader", []Reading{first}, rd(Second, Sinus, Certain, 1, d2), "reader"},
		{"another first", []Reading{first}, rd(First, AF, Certain, 2, d2), "role"},
		{"adjudication of a disagreement", []Reading{first, second}, rd(Adjudication, AF, Certain, 3, d3), ""},
		{"adjudication by a reader (consensus)", []Reading{first, second}, rd(Adjudication, AF, Certain, 1, d3), ""},
		{"adjudication when they agree", []Reading{first, agree}, rd(Adjudication, AF, Certain, 3, d3), "role"},
		{"anything after adjudication", []Reading{first, second, rd(Adjudication, AF, Certain, 3, d3)}, rd(Adjudication, AF, Certain, 3, d3), "role"},
		{"bad rhythm", nil, Reading{Role: First, Rhythm: "irregular"}, "rhythm"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			err := Check(tc.existing, tc.next)
			if tc.field == "" {
				if err != nil {
					t.Fatalf("refused: %v", err)
				}
				return
			}
			var ve *cohort.ValidationError
			if !errors.As(err, &ve) || ve.Fields[tc.field] == "" {
				t.Fatalf("got %v, want a message on %q", err, tc.field)
			}
		})
	}
}

func TestNext(t *testing.T) {
	first := rd(First, AF, Certain, 1, d1)
	if got := Next(nil); got != First {
		t.Errorf("empty: %q", got)
	}
	if got := Next([]Reading{first}); got != Second {
		t.Errorf("after first: %q", got)
	}
	if got := Next([]Reading{first, rd(Second, AF, Probable, 2, d1)}); got != "" {
		t.Errorf("after agreement: %q", got)
	}
	if got := Next([]Reading{first, rd(Second, Other, Probable, 2, d1)}); got != Adjudication {
		t.Errorf("after disagreement: %q", got)
	}
}

// TestCategoriesCoverEveryValue checks that every verdict maps to a common
// category and every reading of the recorder except "no device reading"
// does.
func TestCategoriesCoverEveryValue(t *testing.T) {
	in := map[Category]bool{}
	for _, c := range Categories() {
		in[c] = true
	}
	for _, r := range Rhythms() {
		c, ok := RhythmCategory(r)
		if !ok || !in[c] {
			t.Errorf("rhythm %s maps to %q", r, c)
		}
	}
	for _, a := range Autos() {
		c, ok := AutoCategory(a)
		if ok != (a != AutoNoReading) || (ok && !in[c]) {
			t.Errorf("auto %s maps to %q, %v", a, c, ok)
		}
	}
	// An empty automatic interpretation is taken as none by recording
	// intake (ecg.Intake, tested there); here the defined values only.
	if !AutoNoReading.Valid() || Auto("maybe").Valid() || !Probable.Valid() || Confidence("sure").Valid() {
		t.Error("automatic interpretation or confidence validity")
	}
	if Rhythm("sinus_rhythm").Valid() {
		t.Error("a demo-style value is accepted as a rhythm")
	}
	if Uninterpretable.Interpretable() || !Flutter.Interpretable() {
		t.Error("interpretable")
	}
}

// TestDiagnostic checks the diagnostic-recording rule: settled, interpretable
// and long enough. The 30 s minimum for a single-lead diagnosis is the
// ESC 2020 atrial fibrillation guideline's (from memory); this checks the rule's
// three parts, each able to fail it alone.
func TestDiagnostic(t *testing.T) {
	settled := Conclusion{Final: true, Rhythm: AF}
	cases := []struct {
		name     string
		v        Conclusion
		tooShort bool
		want     bool
	}{
		{"settled AF, long enough", settled, false, true},
		{"settled sinus, long enough", Conclusion{Final: true, Rhythm: Sinus}, false, true},
		{"settled AF, too short", settled, true, false},
		{"not settled", Conclusion{Rhythm: AF}, false, false},
		{"settled uninterpretable", Conclusion{Final: true, Rhythm: Uninterpretable}, false, false},
	}
	for _, c := range cases {
		if got := c.v.Diagnostic(c.tooShort); got != c.want {
			t.Errorf("%s: Diagnostic = %v, want %v", c.name, got, c.want)
		}
	}
}

// TestConfirmsAF checks the confirmed-AF rule on resolved readings: a first
// reading of AF alone confirms; a second reader who disagrees takes the
// confirmation away until an adjudication settles on AF; a short recording or
// another rhythm never confirms. The rules are the study's double-reading
// scheme (common practice) and the 30 s minimum (from memory, as above).
func TestConfirmsAF(t *testing.T) {
	for _, tc := range []struct {
		name     string
		in       []Reading
		tooShort bool
		want     bool
	}{
		{"first reads AF", []Reading{rd(First, AF, Certain, 1, d1)}, false, true},
		{"first AF, second sinus, no adjudication", []Reading{rd(First, AF, Certain, 1, d1), rd(Second, Sinus, Certain, 2, d2)}, false, false},
		{"adjudicated AF", []Reading{rd(First, AF, Certain, 1, d1), rd(Second, Sinus, Certain, 2, d2), rd(Adjudication, AF, Probable, 3, d3)}, false, true},
		{"adjudicated sinus", []Reading{rd(First, AF, Certain, 1, d1), rd(Second, Sinus, Certain, 2, d2), rd(Adjudication, Sinus, Probable, 3, d3)}, false, false},
		{"agreed AF", []Reading{rd(First, AF, Certain, 1, d1), rd(Second, AF, Probable, 2, d2)}, false, true},
		{"AF on a short recording", []Reading{rd(First, AF, Certain, 1, d1)}, true, false},
		{"flutter", []Reading{rd(First, Flutter, Certain, 1, d1)}, false, false},
		{"unread", nil, false, false},
	} {
		v, err := Resolve(tc.in)
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		if got := v.ConfirmsAF(tc.tooShort); got != tc.want {
			t.Errorf("%s: ConfirmsAF = %v, want %v", tc.name, got, tc.want)
		}
	}
}

// TestRecorderReadingWords: the recorder's readings are worded as the
// device's call, each distinctly, and the comparison text names every one of
// them beside the readers' rhythms it is compared with.
func TestRecorderReadingWords(t *testing.T) {
	seen := map[string]bool{}
	for _, a := range Autos() {
		l := a.Label()
		if !strings.Contains(l, "device") || seen[l] || !a.Valid() {
			t.Errorf("recorder reading %s worded %q: want a distinct wording that says it is the device's", a, l)
		}
		seen[l] = true
		if !strings.Contains(CategoryMapping, l) {
			t.Errorf("the category mapping does not name %q: %s", l, CategoryMapping)
		}
	}
	for _, r := range Rhythms() {
		if !strings.Contains(CategoryMapping, r.Label()) {
			t.Errorf("the category mapping does not name the rhythm %q", r.Label())
		}
	}
	for _, c := range Categories() {
		if !strings.Contains(CategoryMapping, string(c)+" (recorder: ") {
			t.Errorf("the category mapping does not explain %q", c)
		}
	}
}

package overread

import (
	"errors"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// TestSettle checks the rules of a new reading (ours, see the package
// comment): filled in where the entry leaves things out, refused field by
// field where it breaks a rule.
func TestSettle(t *testing.T) {
	today := cohort.Date{Year: 2026, Month: 6, Day: 10}
	taken := cohort.Date{Year: 2026, Month: 6, Day: 3}
	first := Reading{Role: First, Rhythm: AF, Confidence: Certain, ReaderID: 7, Reader: "A", On: taken}
	good := Entry{Reading: Reading{Rhythm: Sinus, Confidence: Probable, ReaderID: 8, Reader: "B"}, Comment: "  regular P waves \n"}

	got, err := good.Settle(nil, today, taken)
	if err != nil {
		t.Fatal(err)
	}
	if got.Role != First || got.On != today || got.Comment != "regular P waves" {
		t.Errorf("settled %+v: want the first reading, today, the comment trimmed", got)
	}
	if got, err := good.Settle([]Reading{first}, today, taken); err != nil || got.Role != Second {
		t.Errorf("after a first reading: %+v, %v; want the second", got, err)
	}

	for _, tc := range []struct {
		name     string
		existing []Reading
		edit     func(*Entry)
		field    string
		want     string
	}{
		{"no rhythm", nil, func(e *Entry) { e.Rhythm = "" }, "rhythm", "rhythm"},
		{"unknown rhythm", nil, func(e *Entry) { e.Rhythm = "sinus_rhythm" }, "rhythm", "rhythm"},
		{"no confidence", nil, func(e *Entry) { e.Confidence = "" }, "confidence", "how sure"},
		{"long comment", nil, func(e *Entry) { e.Comment = strings.Repeat("x", MaxCommentChars+1) }, "comment", "2000"},
		{"no investigator", nil, func(e *Entry) { e.ReaderID = 0 }, "reader", "active investigator"},
		{"day in the future", nil, func(e *Entry) { e.On = cohort.Date{Year: 2026, Month: 6, Day: 11} }, "read_on", "future"},
		{"day before the recording", nil, func(e *Entry) { e.On = cohort.Date{Year: 2026, Month: 6, Day: 2} }, "read_on", "3 Jun 2026"},
		{"second by the first reader", []Reading{first}, func(e *Entry) { e.ReaderID = 7 }, "reader", "another investigator"},
		{"not the role due", []Reading{first}, func(e *Entry) { e.Role = First }, "role", "second reading"},
		{"unknown role", nil, func(e *Entry) { e.Role = "third" }, "role", "first reading"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			e := good
			tc.edit(&e)
			_, err := e.Settle(tc.existing, today, taken)
			var ve *cohort.ValidationError
			if !errors.As(err, &ve) || !strings.Contains(ve.Fields[tc.field], tc.want) {
				t.Errorf("got %v, want %q on %s", err, tc.want, tc.field)
			}
		})
	}

	// Every refusal at once.
	_, err = Entry{Reading: Reading{Rhythm: AF, On: cohort.Date{Year: 2027, Month: 1, Day: 1}}}.Settle(nil, today, taken)
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) || len(ve.Fields) != 3 {
		t.Errorf("got %v, want confidence, reader and read_on together", err)
	}
}

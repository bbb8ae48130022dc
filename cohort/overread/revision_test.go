package overread

import (
	"errors"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// TestRevisionRules: only the last reading entered, only by its reader, only
// with a reason; an amendment must change something; the readings after a
// correction are the ones Resolve then settles (finding 5 of issue 19:
// readings could not be corrected).
func TestRevisionRules(t *testing.T) {
	on := cohort.Date{Year: 2026, Month: 5, Day: 4}
	first := Reading{Role: First, Rhythm: AF, Confidence: Certain, ReaderID: 7, Reader: "Reader Seven", On: on}
	second := Reading{Role: Second, Rhythm: Sinus, Confidence: Probable, ReaderID: 8, Reader: "Reader Eight", On: on}
	for _, c := range []struct {
		name    string
		current []Reading
		rev     Revision
		field   string     // the refusal's field; "" when accepted
		want    Conclusion // after an accepted correction
	}{
		{"amend the only reading", []Reading{first}, Revision{Role: First, Change: Amended, Rhythm: Flutter, Confidence: Certain, Reason: "misclicked", By: 7}, "",
			Conclusion{Status: Single, Final: true, Rhythm: Flutter, SettledOn: on}},
		{"withdraw the only reading", []Reading{first}, Revision{Role: First, Change: Withdrawn, Reason: "wrong recording", By: 7}, "",
			Conclusion{Status: Unread}},
		{"the second reader agrees after all", []Reading{first, second}, Revision{Role: Second, Change: Amended, Rhythm: AF, Confidence: Probable, Reason: "looked again", By: 8}, "",
			Conclusion{Status: Agreed, Final: true, Rhythm: AF, SettledOn: on, ConfidenceDiffers: true}},
		{"the second reading withdrawn", []Reading{first, second}, Revision{Role: Second, Change: Withdrawn, Reason: "read the wrong lead", By: 8}, "",
			Conclusion{Status: Single, Final: true, Rhythm: AF, SettledOn: on}},
		{"a first reading the second rests on", []Reading{first, second}, Revision{Role: First, Change: Withdrawn, Reason: "x", By: 7}, "role", Conclusion{}},
		{"someone else's reading", []Reading{first}, Revision{Role: First, Change: Withdrawn, Reason: "x", By: 8}, "reader", Conclusion{}},
		{"no reason", []Reading{first}, Revision{Role: First, Change: Withdrawn, Reason: "  ", By: 7}, "reason", Conclusion{}},
		{"a reason too long", []Reading{first}, Revision{Role: First, Change: Withdrawn, Reason: strings.Repeat("x", MaxReasonChars+1), By: 7}, "reason", Conclusion{}},
		{"an amendment that changes nothing", []Reading{first}, Revision{Role: First, Change: Amended, Rhythm: AF, Confidence: Certain, Reason: "x", By: 7}, "rhythm", Conclusion{}},
		{"an amendment without a confidence", []Reading{first}, Revision{Role: First, Change: Amended, Rhythm: Sinus, Reason: "x", By: 7}, "confidence", Conclusion{}},
		{"no reading in that role", []Reading{first}, Revision{Role: Second, Change: Withdrawn, Reason: "x", By: 8}, "role", Conclusion{}},
		{"neither amended nor withdrawn", []Reading{first}, Revision{Role: First, Change: "lost", Reason: "x", By: 7}, "change", Conclusion{}},
	} {
		after, err := c.rev.Apply(c.current)
		var ve *cohort.ValidationError
		switch {
		case c.field != "":
			if !errors.As(err, &ve) || ve.Fields[c.field] == "" {
				t.Errorf("%s: %v, want a refusal on %s", c.name, err, c.field)
			}
			continue
		case err != nil:
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		got, err := Resolve(after)
		if err != nil || got != c.want {
			t.Errorf("%s: conclusion %+v (%v), want %+v", c.name, got, err, c.want)
		}
	}
	if Revisable([]Reading{first, second}) != Second || Revisable(nil) != "" {
		t.Error("Revisable does not name the last reading entered")
	}
}

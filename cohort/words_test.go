package cohort

import "testing"

// Counted words follow English's regular plural (common practice; the
// spelling rules of any English grammar, from memory): "s", "ies" after a
// consonant and "y", "es" after s, x, z, ch and sh. The exports page once
// listed "2 summarys".
func TestPluralAndNoun(t *testing.T) {
	for _, tt := range []struct {
		n    int
		one  string
		want string
	}{
		{1, "case", "1 case"},
		{0, "case", "0 cases"},
		{3, "case", "3 cases"},
		{2, "summary", "2 summaries"},
		{1, "summary", "1 summary"},
		{4, "day", "4 days"},
		{2, "recovery code", "2 recovery codes"},
		{2, "new flag", "2 new flags"},
		{2, "box", "2 boxes"},
		{2, "batch", "2 batches"},
	} {
		if got := Plural(tt.n, tt.one); got != tt.want {
			t.Errorf("Plural(%d, %q) = %q, want %q", tt.n, tt.one, got, tt.want)
		}
	}
	if got := Noun(1, "participant"); got != "participant" {
		t.Errorf("Noun(1) = %q", got)
	}
	if got := Noun(12, "participant"); got != "participants" {
		t.Errorf("Noun(12) = %q", got)
	}
}

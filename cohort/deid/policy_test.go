package deid

import (
	"errors"
	"slices"
	"testing"
)

// Free text never leaves the system (domain.md, de-identification; our
// policy) and no identifier column is on any allow-list.
func TestAllowListsHoldNoIdentifiers(t *testing.T) {
	never := neverAllowed
	for _, must := range []string{"notes", "name", "phone", "email", "birth_date", "study_id", "zip"} {
		if !slices.Contains(never, must) {
			t.Errorf("%q missing from neverAllowed", must)
		}
	}
	if len(allowList) == 0 {
		t.Fatal("no exports")
	}
	for e, list := range allowList {
		fields := slices.Clone(list)
		if len(fields) == 0 {
			t.Errorf("%s: empty allow-list", e)
		}
		if !slices.Contains(fields, "referral_code") {
			t.Errorf("%s: participants must be named by referral code", e)
		}
		for _, f := range fields {
			if slices.Contains(never, f) {
				t.Errorf("%s allows %q, which is never allowed", e, f)
			}
		}
		if err := CheckFields(e, fields); err != nil {
			t.Errorf("%s rejects its own allow-list: %v", e, err)
		}
		if err := CheckFields(e, append(fields[:1:1], "notes")); !errors.Is(err, ErrNotAllowed) {
			t.Errorf("%s: notes column: err = %v, want ErrNotAllowed", e, err)
		}
	}
}

func TestCheckFieldsUnknownExport(t *testing.T) {
	wantInvalid(t, "unknown export", CheckFields("nightly-dump", []string{"referral_code"}))
}

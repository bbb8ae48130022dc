package demo

import (
	"regexp"
	"strings"
	"testing"
)

// TestTrackingNumbersAreFictional: a demo tracking number says it is invented
// and never takes the shape of an international postal item number (two
// letters, nine digits, two letters; the UPU S10 layout, from memory) nor of
// two letters and nine digits alone.
func TestTrackingNumbersAreFictional(t *testing.T) {
	postal := regexp.MustCompile(`^[A-Z]{2}\d{9}([A-Z]{2})?$`)
	for _, id := range []int64{1, 42, 7919, 99999, 123456789} {
		got := TrackingNumber(id)
		if !strings.HasPrefix(got, "DEMO-") {
			t.Errorf("case %d: tracking number %q does not say it is invented", id, got)
		}
		if postal.MatchString(got) || postal.MatchString(strings.ReplaceAll(got, "-", "")) || !strings.HasPrefix(got, "DEMO-PARCEL-") {
			t.Errorf("case %d: tracking number %q takes the postal item-number shape", id, got)
		}
	}
	if TrackingNumber(1) == TrackingNumber(2) {
		t.Error("two cases share a tracking number")
	}
}

// TestWatchModelsAreOurOwn: the invented watch models are a maker's name and
// a model code, not a word followed by a generation number or a marketing
// word the way consumer wearables are often named ("... Band 3", "... Air").
func TestWatchModelsAreOurOwn(t *testing.T) {
	vendorish := regexp.MustCompile(`(?i)\s(band|air|pro|max|lite|mini|plus|ultra|fit|active|sport)\b|\s\d+$`)
	code := regexp.MustCompile(`^[A-Z][a-z]+ [A-Z]{2}-\d+R?$`)
	s := mustDefault(t)
	worn := map[string]bool{}
	for _, p := range s.Participants {
		worn[p.Watch] = true
	}
	for _, w := range Watches {
		if vendorish.MatchString(w.Name) || !code.MatchString(w.Name) {
			t.Errorf("watch model %q: want an invented maker and a model code such as \"Veyra VW-30\"", w.Name)
		}
		if !worn[w.Name] {
			t.Errorf("nobody in the default demo wears the %q", w.Name)
		}
	}
	for name := range worn {
		found := false
		for _, w := range Watches {
			found = found || w.Name == name
		}
		if !found {
			t.Errorf("a participant wears %q, which is not in Watches", name)
		}
	}
}

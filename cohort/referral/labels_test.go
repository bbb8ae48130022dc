package referral

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"os"
	"testing"

	"cohortdesk/cohort/overread"
)

// TestSummaryWordsAreOverreads: the summary words the over-read and the
// recorder's own interpretation exactly as the case and recording pages do,
// with overread's Label methods. Until this was so the summary kept its own
// copy of those words, which had drifted: a recorder's "sinus" reading was
// printed as "sinus" on summaries while the pages said "sinus rhythm". That
// one wording is the intended change; the other words were the same.
func TestSummaryWordsAreOverreads(t *testing.T) {
	for _, a := range overread.Autos() {
		src := source(t)
		src.Recording.Auto = a
		if got := mustBuild(t, src).Recording.AutoInterpretation; got != a.Label() {
			t.Errorf("recorder's %s worded %q, want %q", a, got, a.Label())
		}
	}
	src := source(t)
	src.Recording.Auto = overread.AutoSuggestsRegular
	if got := mustBuild(t, src).Recording.AutoInterpretation; got != "device suggests a regular rhythm" {
		t.Errorf("recorder's regular reading worded %q, want \"device suggests a regular rhythm\" as on the recording page", got)
	}
	for _, r := range overread.Rhythms() {
		src := source(t)
		src.OverRead.Rhythm = r
		o := mustBuild(t, src).OverRead
		if o.Rhythm != r || o.RhythmLabel != r.Label() {
			t.Errorf("rhythm %s shown as %q %q", r, o.Rhythm, o.RhythmLabel)
		}
	}
	for role, want := range map[overread.Role]string{overread.First: "first reader",
		overread.Adjudication: "adjudication (the first two readers disagreed)"} {
		src := source(t)
		src.OverRead.Role, src.OverRead.Confidence = role, overread.Probable
		if o := mustBuild(t, src).OverRead; o.Reader != want || o.Confidence != "probable" {
			t.Errorf("%s: reader %q confidence %q", role, o.Reader, o.Confidence)
		}
	}
}

// TestIssuedBeforeTheLabelFix: a summary issued before the wording fix keeps
// its recorded words and still matches its recorded digest. The fixture is the
// content the program wrote before the fix (recorder's reading "sinus") and
// the digest it recorded, both printed by that version of Build, Content and
// Digest.
func TestIssuedBeforeTheLabelFix(t *testing.T) {
	s := verifyRecorded(t, "testdata/issued-before-label-fix.json", "bf278978be710b25721efcb68dff2c6cf0c3ea0b3369e96414a3b03c2302913f")
	if s.Recording == nil || s.Recording.AutoInterpretation != "sinus" || s.OverRead.Rhythm != overread.AF {
		t.Errorf("recorded words changed: %+v %+v", s.Recording, s.OverRead)
	}
}

// TestIssuedBeforeTheRecorderWordsChanged: the recorder's readings got words
// of our own ("possible AF" became "device suggests AF", with new stored
// values, migration 0070). A summary issued before keeps its recorded words
// and still matches its recorded digest. The fixture is the content the
// program wrote then for a recorder reading of AF, and the digest it
// recorded, both printed by that version of Build, Content and Digest.
func TestIssuedBeforeTheRecorderWordsChanged(t *testing.T) {
	s := verifyRecorded(t, "testdata/issued-with-earlier-recorder-words.json", "3ee58ac22454e6226836c9189c9a7e2da990fec1745e0111c22d7ddc40e80709")
	if s.Recording == nil || s.Recording.AutoInterpretation != "possible AF" {
		t.Errorf("recorded words changed: %+v", s.Recording)
	}
	// A summary issued now for the same reading uses today's words.
	src := source(t)
	src.Recording.Auto = overread.AutoSuggestsAF
	if got := mustBuild(t, src).Recording.AutoInterpretation; got != "device suggests AF" {
		t.Errorf("a new summary words the recorder's AF reading %q", got)
	}
}

// verifyRecorded reads a recorded summary's content from a fixture, checks
// that it is the content that was digested, decodes it as the database gives
// it back (its own key order and spacing) and checks that its digest is still
// the recorded one.
func verifyRecorded(t *testing.T, file, recorded string) Summary {
	t.Helper()
	b, err := os.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	b = b[:len(b)-1] // the file's final newline
	if sum := sha256.Sum256(b); hex.EncodeToString(sum[:]) != recorded {
		t.Fatal("the fixture is not the content that was digested")
	}
	var generic map[string]any
	if err := json.Unmarshal(b, &generic); err != nil {
		t.Fatal(err)
	}
	stored, _ := json.MarshalIndent(generic, "", " ")
	s, err := Decode(stored)
	if err != nil {
		t.Fatal(err)
	}
	if got, _ := Digest(s); got != recorded {
		t.Errorf("digest %s, want the recorded %s", got, recorded)
	}
	return s
}

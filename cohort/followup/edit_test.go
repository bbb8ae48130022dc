package followup

import (
	"strings"
	"testing"
	"time"
)

func TestEnterRecordsTheStepTimes(t *testing.T) {
	t0 := time.Date(2026, 6, 1, 9, 0, 0, 0, time.UTC)
	t1 := t0.Add(48 * time.Hour)
	for _, c := range []struct {
		name string
		from CaseFacts
		to   State
		want CaseFacts
	}{
		{"first reach", CaseFacts{State: Contacting}, Reached, CaseFacts{State: Reached, ReachedAt: t1}},
		{"reached again keeps the first time", CaseFacts{State: Open, ReachedAt: t0}, Reached, CaseFacts{State: Reached, ReachedAt: t0}},
		{"shipment", CaseFacts{State: Reached, ReachedAt: t0}, RecorderSent, CaseFacts{State: RecorderSent, ReachedAt: t0, RecorderSentAt: t1}},
		{"shipment corrected elsewhere keeps the time", CaseFacts{State: RecorderSent, RecorderSentAt: t0}, RecorderSent,
			CaseFacts{State: RecorderSent, RecorderSentAt: t0}},
		{"repeat shipment after an unusable recording", CaseFacts{State: RecordingReceived, RecorderSentAt: t0, RecordingReceivedAt: t0}, RecorderSent,
			CaseFacts{State: RecorderSent, RecorderSentAt: t1}},
		{"return", CaseFacts{State: RecorderSent, RecorderSentAt: t0}, RecordingReceived,
			CaseFacts{State: RecordingReceived, RecorderSentAt: t0, RecordingReceivedAt: t1}},
		{"over-read", CaseFacts{State: RecordingReceived}, OverRead, CaseFacts{State: OverRead, OverReadAt: t1}},
		{"closing records no step", CaseFacts{State: OverRead, OverReadAt: t0}, Referred, CaseFacts{State: Referred, OverReadAt: t0}},
		{"over-read withdrawn", CaseFacts{State: OverRead, RecordingReceivedAt: t0, OverReadAt: t1}, RecordingReceived, CaseFacts{State: RecordingReceived, RecordingReceivedAt: t0}},
		{"contacting records no step", CaseFacts{State: Open}, Contacting, CaseFacts{State: Contacting}},
	} {
		got := c.from
		got.Enter(c.to, t1)
		if got.State != c.want.State || !got.ReachedAt.Equal(c.want.ReachedAt) || !got.RecorderSentAt.Equal(c.want.RecorderSentAt) ||
			!got.RecordingReceivedAt.Equal(c.want.RecordingReceivedAt) || !got.OverReadAt.Equal(c.want.OverReadAt) {
			t.Errorf("%s: got %+v, want %+v", c.name, got, c.want)
		}
	}
}

func TestEditLabels(t *testing.T) {
	for _, e := range []Edit{EditOpen, EditExtend, EditLateWeeks, EditAssign, EditAttempt, EditMove, EditClose, EditShipment,
		EditReturn, EditNote, EditWithdrawn, EditAdvance} {
		if l := e.Label(); l == string(e) || l == "" || !strings.HasPrefix(string(e), "case.") {
			t.Errorf("%s: label %q", e, l)
		}
	}
	if got := Edit("case.unknown").Label(); got != "case.unknown" {
		t.Errorf("unknown edit worded %q, want it shown as stored", got)
	}
}

func TestStaleCopyRefusal(t *testing.T) {
	seen := CaseFields{State: Open}
	coordinator := Edited{By: "Ann Teller (coordinator)", Edit: EditAssign}
	t.Run("the field they set was changed", func(t *testing.T) {
		now := CaseFields{State: Open, Owner: "Ann Teller"}
		ce := StaleCopy{Seen: &seen, SeenVersion: 1, Now: now, NowVersion: 2, Since: []Edited{coordinator}}.Refusal(SetOwner("Bo Reyes"))
		for _, want := range []string{`owner is now "Ann Teller"`, "Since you opened it: Ann Teller (coordinator) changed the owner."} {
			if !strings.Contains(ce.Message, want) {
				t.Errorf("message %q lacks %q", ce.Message, want)
			}
		}
		if got := ce.Changes[FieldOwner]; got != [2]string{"Ann Teller", "Bo Reyes"} {
			t.Errorf("changes %v", ce.Changes)
		}
	})
	t.Run("their edit collides with a change they have not seen", func(t *testing.T) {
		now := CaseFields{State: Contacting}
		attempt := Edited{By: "Ann Teller (coordinator)", Edit: EditAttempt}
		ce := StaleCopy{Seen: &seen, SeenVersion: 2, Now: now, NowVersion: 4, Since: []Edited{attempt, attempt}}.Refusal(SetNote("call after 5 pm"))
		want := `someone else changed this case after you opened it (state is now "contacting"); check their changes and save again. ` +
			"Since you opened it: Ann Teller (coordinator) logged a contact attempt."
		if ce.Message != want {
			t.Errorf("message\n got %q\nwant %q", ce.Message, want)
		}
	})
	t.Run("nothing they set collides, but the case moved on", func(t *testing.T) {
		now := CaseFields{State: Open, Owner: "Ann Teller"}
		ce := StaleCopy{Seen: &seen, SeenVersion: 1, Now: now, NowVersion: 2}.Refusal(SetOwner("Ann Teller"))
		want := `someone else changed this case after you opened it (owner is now "Ann Teller"); check their changes and try again`
		if ce.Message != want {
			t.Errorf("message\n got %q\nwant %q", ce.Message, want)
		}
		if got := ce.Changes[FieldOwner]; got != [2]string{"Ann Teller", "Ann Teller"} {
			t.Errorf("changes %v", ce.Changes)
		}
	})
	t.Run("no record of their version", func(t *testing.T) {
		ce := StaleCopy{SeenVersion: 3, Now: CaseFields{State: Reached}, NowVersion: 7}.Refusal(SetState(RecorderSent))
		if want := "this case is at version 7, not the version 3 you opened; reload it and try again"; ce.Message != want {
			t.Errorf("message %q, want %q", ce.Message, want)
		}
	})
}

func TestIntents(t *testing.T) {
	base := CaseFields{State: Open, Owner: "A", Note: "n"}
	if got := LogAttempt(OutcomeReached)(base); got.State != Reached || got.Owner != "A" {
		t.Errorf("reaching intends %+v", got)
	}
	if got := LogAttempt(OutcomeNoAnswer)(CaseFields{State: RecorderSent}); got.State != RecorderSent {
		t.Errorf("a reminder call intends a move: %+v", got)
	}
	if got := SetNote("m")(base); got.Note != "m" || got.State != Open {
		t.Errorf("note intends %+v", got)
	}
}

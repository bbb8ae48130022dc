package followup

import (
	"errors"
	"reflect"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
)

func TestDiff(t *testing.T) {
	ny, berlin := mustLoad(t, "America/New_York"), mustLoad(t, "Europe/Berlin")
	due := time.Date(2026, 4, 16, 0, 0, 0, 0, berlin)
	base := CaseFields{State: Reached, Owner: "coord-1", Due: due, Note: "prefers calls after 5 pm"}
	tests := []struct {
		name  string
		after CaseFields
		want  map[string][2]string
	}{
		{"no change", base, map[string][2]string{}},
		{"same instant in another zone is no change", CaseFields{State: Reached, Owner: "coord-1", Due: due.In(ny), Note: base.Note}, map[string][2]string{}},
		{"state shown by label", CaseFields{State: RecorderSent, Owner: "coord-1", Due: due, Note: base.Note},
			map[string][2]string{FieldState: {"reached", "recorder sent"}}},
		{"owner removed", CaseFields{State: Reached, Due: due, Note: base.Note},
			map[string][2]string{FieldOwner: {"coord-1", ""}}},
		{"deadline cleared and note changed", CaseFields{State: Reached, Owner: "coord-1", Note: "no calls"},
			map[string][2]string{FieldDue: {"16 Apr 2026 00:00 CEST", ""}, FieldNote: {"prefers calls after 5 pm", "no calls"}}},
		{"everything", CaseFields{State: ClosedDeclined, Owner: "coord-2", Due: due.Add(24 * time.Hour), Note: ""},
			map[string][2]string{
				FieldState: {"reached", "closed (declined)"},
				FieldOwner: {"coord-1", "coord-2"},
				FieldDue:   {"16 Apr 2026 00:00 CEST", "17 Apr 2026 00:00 CEST"},
				FieldNote:  {"prefers calls after 5 pm", ""},
			}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := Diff(base, tt.after); !reflect.DeepEqual(got, tt.want) {
				t.Errorf("got %v, want %v", got, tt.want)
			}
			// Reversing the arguments swaps every pair.
			for f, v := range Diff(tt.after, base) {
				if w := tt.want[f]; w != [2]string{v[1], v[0]} {
					t.Errorf("reversed %s: %v, want %v swapped", f, v, w)
				}
			}
		})
	}
}

// TestDiffCoversEveryField changes each field of CaseFields in turn (found by
// reflection) so a field added later cannot be forgotten by Diff.
func TestDiffCoversEveryField(t *testing.T) {
	base := CaseFields{State: Open, Owner: "coord-1", Due: time.Date(2026, 4, 16, 0, 0, 0, 0, time.UTC), Note: "n"}
	typ := reflect.TypeOf(base)
	for i := 0; i < typ.NumField(); i++ {
		changed := base
		f := reflect.ValueOf(&changed).Elem().Field(i)
		switch {
		case f.Kind() == reflect.String:
			f.SetString(f.String() + "-changed")
		case f.Type() == reflect.TypeOf(time.Time{}):
			f.Set(reflect.ValueOf(base.Due.Add(time.Hour)))
		default:
			t.Fatalf("field %s of kind %s: teach this test how to change it", typ.Field(i).Name, f.Kind())
		}
		got := Diff(base, changed)
		if len(got) != 1 {
			t.Errorf("changing %s gave %v, want exactly one change", typ.Field(i).Name, got)
		}
		for k := range got {
			if k != strings.ToLower(typ.Field(i).Name) {
				t.Errorf("changing %s reported as %q", typ.Field(i).Name, k)
			}
		}
	}
}

func TestConflict(t *testing.T) {
	base := CaseFields{State: Contacting, Owner: "coord-1", Note: "left voicemail"}
	tests := []struct {
		name        string
		theirs      CaseFields
		yours       CaseFields
		wantChanges map[string][2]string // nil: no conflict
		wantInMsg   string
	}{
		{"nobody else changed anything", base, CaseFields{State: Reached, Owner: "coord-1", Note: "left voicemail"}, nil, ""},
		{"both made the same edit", CaseFields{State: Reached, Owner: "coord-1", Note: "left voicemail"},
			CaseFields{State: Reached, Owner: "coord-1", Note: "left voicemail"}, nil, ""},
		{"they took the case, you edited the note", CaseFields{State: Contacting, Owner: "coord-2", Note: "left voicemail"},
			CaseFields{State: Contacting, Owner: "coord-1", Note: "second voicemail"},
			map[string][2]string{FieldOwner: {"coord-2", "coord-1"}}, `owner is now "coord-2"`},
		{"both moved the state differently", CaseFields{State: ClosedDeclined, Owner: "coord-1", Note: "left voicemail"},
			CaseFields{State: Reached, Owner: "coord-1", Note: "left voicemail"},
			map[string][2]string{FieldState: {"closed (declined)", "reached"}}, `state is now "closed (declined)"`},
		{"they cleared the owner", CaseFields{State: Contacting, Note: "left voicemail"}, base,
			map[string][2]string{FieldOwner: {"", "coord-1"}}, "owner is now (none)"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ce := Conflict(base, tt.theirs, tt.yours)
			if tt.wantChanges == nil {
				if ce != nil {
					t.Errorf("got conflict %v, want none", ce)
				}
				return
			}
			if ce == nil {
				t.Fatal("no conflict reported")
			}
			if !reflect.DeepEqual(ce.Changes, tt.wantChanges) {
				t.Errorf("changes %v, want %v", ce.Changes, tt.wantChanges)
			}
			if !strings.Contains(ce.Message, tt.wantInMsg) {
				t.Errorf("message %q lacks %q", ce.Message, tt.wantInMsg)
			}
			var err error = ce
			if !errors.Is(err, cohort.ErrConflict) {
				t.Error("conflict does not match cohort.ErrConflict")
			}
		})
	}
}

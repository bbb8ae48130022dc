package followup

import (
	"fmt"
	"reflect"
	"slices"
	"strings"
	"testing"
)

// pw builds positive weeks with keys "w<week>" (or the given key after a colon:
// "5:b" is week 5 with key "b"), to keep tables short.
func pw(tb testing.TB, specs ...string) []PositiveWeek {
	tb.Helper()
	out := make([]PositiveWeek, 0, len(specs))
	for _, s := range specs {
		week, key, found := strings.Cut(s, ":")
		var n int
		if _, err := fmt.Sscanf(week, "%d", &n); err != nil {
			tb.Fatalf("bad week spec %q: %v", s, err)
		}
		if !found {
			key = "w" + week
		}
		out = append(out, PositiveWeek{Week: n, Key: key})
	}
	return out
}

// spans renders episodes as "first-last" strings for compact comparisons.
func spans(eps []Episode) []string {
	out := make([]string, len(eps))
	for i, e := range eps {
		out[i] = fmt.Sprintf("%d-%d", e.First, e.Last)
	}
	return out
}

func TestEpisodes(t *testing.T) {
	tests := []struct {
		name  string
		weeks []string
		gap   int
		want  []string
	}{
		// The gap rule's own examples (ours): with gap 2, weeks 3 and 5 merge,
		// weeks 3 and 7 do not.
		{"gap 2 merges 3 and 5", []string{"3", "5"}, 2, []string{"3-5"}},
		{"gap 2 keeps 3 and 7 apart", []string{"3", "7"}, 2, []string{"3-3", "7-7"}},
		{"gap 2 keeps 3 and 6 apart", []string{"3", "6"}, 2, []string{"3-3", "6-6"}},
		{"gap 1 merges only back-to-back weeks", []string{"3", "4", "6"}, 1, []string{"3-4", "6-6"}},
		{"chained steps make one long episode", []string{"1", "3", "5", "7", "9"}, 2, []string{"1-9"}},
		{"unsorted input", []string{"9", "1", "2", "8", "15"}, 1, []string{"1-2", "8-9", "15-15"}},
		{"week 0 is a study week", []string{"0", "1"}, 1, []string{"0-1"}},
		{"two results for one week stay together", []string{"4:b", "4:a", "9"}, 3, []string{"4-4", "9-9"}},
		{"large gap merges everything", []string{"0", "10", "20"}, 10, []string{"0-20"}},
		{"empty input", nil, 1, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := Episodes(pw(t, tt.weeks...), tt.gap)
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(spans(got), tt.want) {
				t.Errorf("got %v, want %v", spans(got), tt.want)
			}
			total := 0
			for _, e := range got {
				total += len(e.Weeks)
				if !slices.IsSortedFunc(e.Weeks, comparePositiveWeeks) {
					t.Errorf("episode %d-%d weeks not sorted: %v", e.First, e.Last, e.Weeks)
				}
			}
			if total != len(tt.weeks) {
				t.Errorf("episodes hold %d weeks, input had %d", total, len(tt.weeks))
			}
		})
	}
}

func TestEpisodesKeepsKeysAndOrder(t *testing.T) {
	got, err := Episodes(pw(t, "5:z", "4:b", "4:a"), 1)
	if err != nil {
		t.Fatal(err)
	}
	want := []Episode{{First: 4, Last: 5, Weeks: []PositiveWeek{{4, "a"}, {4, "b"}, {5, "z"}}}}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("got %+v, want %+v", got, want)
	}
}

func TestEpisodesDoesNotChangeInput(t *testing.T) {
	in := pw(t, "9", "1", "5")
	keep := slices.Clone(in)
	if _, err := Episodes(in, 2); err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(in, keep) {
		t.Errorf("input reordered: %v", in)
	}
}

func TestEpisodesErrors(t *testing.T) {
	tests := []struct {
		name  string
		weeks []PositiveWeek
		gap   int
		want  string
	}{
		{"gap 0", pw(t, "1"), 0, "episode gap 0"},
		{"negative gap", pw(t, "1"), -1, "episode gap -1"},
		{"negative week", []PositiveWeek{{Week: 2, Key: "a"}, {Week: -1, Key: "b"}}, 1, `weeks[1] (key "b"): negative week -1`},
		{"empty key", []PositiveWeek{{Week: 3}}, 1, "weeks[0] (week 3): empty key"},
		{"duplicate key", []PositiveWeek{{Week: 3, Key: "k"}, {Week: 4, Key: "k"}}, 1, `weeks[1]: key "k" already used by weeks[0]`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := Episodes(tt.weeks, tt.gap)
			if err == nil || !strings.Contains(err.Error(), tt.want) || !strings.HasPrefix(err.Error(), "followup: ") {
				t.Errorf("error %v, want one containing %q", err, tt.want)
			}
		})
	}
}

// caseOf builds an existing case for AssignToCases tables; keys are "<id>-w<week>".
func caseOf(id string, st State, weeks ...int) CaseWeeks {
	c := CaseWeeks{ID: id, State: st}
	for _, w := range weeks {
		c.Weeks = append(c.Weeks, PositiveWeek{Week: w, Key: fmt.Sprintf("%s-w%d", id, w)})
	}
	return c
}

// summary renders an Assignment compactly: "extend A:5,6 | late B:9 | new 12-13 | known 3".
func summary(a Assignment) string {
	var parts []string
	add := func(label string, as []Addition) {
		for _, x := range as {
			var ws []string
			for _, w := range x.Weeks {
				ws = append(ws, fmt.Sprint(w.Week))
			}
			parts = append(parts, label+" "+x.CaseID+":"+strings.Join(ws, ","))
		}
	}
	add("extend", a.Extend)
	add("late", a.Late)
	for _, e := range a.New {
		parts = append(parts, fmt.Sprintf("new %d-%d", e.First, e.Last))
	}
	for _, w := range a.Known {
		parts = append(parts, fmt.Sprintf("known %d", w.Week))
	}
	return strings.Join(parts, " | ")
}

func TestAssignToCases(t *testing.T) {
	tests := []struct {
		name  string
		cases []CaseWeeks
		weeks []string
		gap   int
		want  string
	}{
		{"no cases: every episode is new", nil, []string{"3", "4", "9"}, 1, "new 3-4 | new 9-9"},
		{"next week extends an open case", []CaseWeeks{caseOf("A", Contacting, 3, 4)}, []string{"5"}, 1, "extend A:5"},
		{"a week inside the gap extends", []CaseWeeks{caseOf("A", Reached, 3)}, []string{"5"}, 2, "extend A:5"},
		{"a week beyond the gap opens a new case although A is open", []CaseWeeks{caseOf("A", Reached, 3)}, []string{"6"}, 2, "new 6-6"},
		{"a late upload of an earlier week extends", []CaseWeeks{caseOf("A", Open, 5, 6)}, []string{"4"}, 1, "extend A:4"},
		{"a week inside the span extends", []CaseWeeks{caseOf("A", Open, 3, 5)}, []string{"4"}, 1, "extend A:4"},
		{"a run chained to an open case extends it whole", []CaseWeeks{caseOf("A", RecorderSent, 3)}, []string{"6", "5", "4"}, 1, "extend A:4,5,6"},
		{"known keys are skipped", []CaseWeeks{caseOf("A", Open, 3)}, []string{"3:A-w3", "4"}, 1, "extend A:4 | known 3"},
		{"a second result for a week already on the case extends", []CaseWeeks{caseOf("A", Open, 3)}, []string{"3:other"}, 1, "extend A:3"},
		// After closing (ours): within the gap -> noted on the closed case;
		// beyond it -> a new case for the whole run.
		{"a week within the gap of a closed case is noted late", []CaseWeeks{caseOf("A", ClosedNotConfirmed, 3, 4)}, []string{"5"}, 1, "late A:5"},
		{"a week beyond the gap of a closed case opens a new case", []CaseWeeks{caseOf("A", Referred, 3, 4)}, []string{"6"}, 1, "new 6-6"},
		{"a run that starts near a closed case and goes beyond is one new case", []CaseWeeks{caseOf("A", ClosedDeclined, 3, 4)}, []string{"5", "6", "7"}, 2, "new 5-7"},
		{"an open case wins over a closed one", []CaseWeeks{caseOf("A", ClosedUnreachable, 3), caseOf("B", Contacting, 7)}, []string{"5"}, 2, "extend B:5"},
		{"weeks between two open cases go to the nearest", []CaseWeeks{caseOf("A", Contacting, 1, 2), caseOf("B", Open, 7, 8)}, []string{"3", "4", "5", "6"}, 1, "extend A:3,4 | extend B:5,6"},
		{"a tie between open cases goes to the earlier case", []CaseWeeks{caseOf("B", Open, 6), caseOf("A", Open, 2)}, []string{"4"}, 2, "extend A:4"},
		{"late weeks go to the nearest closed case", []CaseWeeks{caseOf("A", Referred, 1), caseOf("B", ClosedWithdrawn, 6)}, []string{"2", "5"}, 1, "late A:2 | late B:5"},
		{"everything at once", []CaseWeeks{caseOf("A", Referred, 1, 2), caseOf("B", Contacting, 10)}, []string{"3", "11", "20", "21", "2:A-w2"}, 1, "extend B:11 | late A:3 | new 20-21 | known 2"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := AssignToCases(tt.cases, pw(t, tt.weeks...), tt.gap)
			if err != nil {
				t.Fatal(err)
			}
			if s := summary(got); s != tt.want {
				t.Errorf("got  %q\nwant %q", s, tt.want)
			}
			// Every new week lands in exactly one place.
			n := len(got.Known)
			for _, x := range append(slices.Clone(got.Extend), got.Late...) {
				n += len(x.Weeks)
			}
			for _, e := range got.New {
				n += len(e.Weeks)
			}
			if n != len(tt.weeks) {
				t.Errorf("%d weeks placed, %d given", n, len(tt.weeks))
			}
		})
	}
}

// TestAssignToCasesMatchesEpisodes: with no cases, new cases are exactly the
// episodes of the weeks, so both functions share one gap rule.
func TestAssignToCasesMatchesEpisodes(t *testing.T) {
	weeks := pw(t, "0", "2", "3", "7", "8", "12", "15", "16")
	for gap := 1; gap <= 5; gap++ {
		want, err := Episodes(weeks, gap)
		if err != nil {
			t.Fatal(err)
		}
		got, err := AssignToCases(nil, weeks, gap)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(got.New, want) {
			t.Errorf("gap %d: new cases %v, episodes %v", gap, spans(got.New), spans(want))
		}
	}
}

func TestAssignToCasesErrors(t *testing.T) {
	tests := []struct {
		name  string
		cases []CaseWeeks
		weeks []PositiveWeek
		gap   int
		want  string
	}{
		{"gap 0", nil, nil, 0, "episode gap 0"},
		{"empty case id", []CaseWeeks{caseOf("", Open, 1)}, nil, 1, "cases[0]: empty case id"},
		{"duplicate case id", []CaseWeeks{caseOf("A", Open, 1), caseOf("A", Open, 5)}, nil, 1, `cases[1]: case id "A" appears twice`},
		{"unknown state", []CaseWeeks{caseOf("A", "lost", 1)}, nil, 1, `case "A": unknown state "lost"`},
		{"case without weeks", []CaseWeeks{{ID: "A", State: Open}}, nil, 1, `case "A": no weeks`},
		{"key on two cases", []CaseWeeks{caseOf("A", Open, 1), {ID: "B", State: Open, Weeks: []PositiveWeek{{5, "A-w1"}}}}, nil, 1, `key "A-w1" is on another case too`},
		{"key with another week", []CaseWeeks{caseOf("A", Open, 1)}, []PositiveWeek{{2, "A-w1"}}, 1, `key "A-w1" is week 1 on a case but week 2 here`},
		{"bad new week", nil, []PositiveWeek{{-3, "x"}}, 1, "negative week -3"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := AssignToCases(tt.cases, tt.weeks, tt.gap)
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %v, want one containing %q", err, tt.want)
			}
		})
	}
}

// FuzzEpisodes checks the gap rule's invariants on arbitrary inputs: weeks are
// kept, sorted, and cut exactly where the step exceeds the gap.
func FuzzEpisodes(f *testing.F) {
	f.Add([]byte{3, 5, 7, 20}, uint8(2))
	f.Add([]byte{9, 1, 1, 2}, uint8(1))
	f.Add([]byte{}, uint8(4))
	f.Fuzz(func(t *testing.T, raw []byte, g uint8) {
		gap := int(g%8) + 1
		weeks := make([]PositiveWeek, len(raw))
		for i, b := range raw {
			weeks[i] = PositiveWeek{Week: int(b % 64), Key: fmt.Sprint(i)}
		}
		eps, err := Episodes(weeks, gap)
		if err != nil {
			t.Fatal(err)
		}
		var flat []PositiveWeek
		for i, e := range eps {
			if e.First != e.Weeks[0].Week || e.Last != e.Weeks[len(e.Weeks)-1].Week {
				t.Fatalf("episode %d bounds %d-%d disagree with weeks %v", i, e.First, e.Last, e.Weeks)
			}
			for j := 1; j < len(e.Weeks); j++ {
				if e.Weeks[j].Week-e.Weeks[j-1].Week > gap {
					t.Fatalf("episode %d holds a step larger than gap %d", i, gap)
				}
			}
			if i > 0 && e.First-eps[i-1].Last <= gap {
				t.Fatalf("episodes %d and %d should have merged (gap %d)", i-1, i, gap)
			}
			flat = append(flat, e.Weeks...)
		}
		if len(flat) != len(weeks) || !slices.IsSortedFunc(flat, comparePositiveWeeks) {
			t.Fatalf("weeks lost or out of order: %v from %v", flat, weeks)
		}
		a, err := AssignToCases(nil, weeks, gap)
		if err != nil || !reflect.DeepEqual(a.New, eps) {
			t.Fatalf("AssignToCases without cases = %v, %v; want the episodes", spans(a.New), err)
		}
	})
}

package wear

import (
	"errors"
	"math/rand/v2"
	"testing"
	"time"
	_ "time/tzdata" // the zone database, so tests do not depend on the machine's

	"cohortdesk/cohort"
)

func mustZone(tb testing.TB, name string) *time.Location {
	tb.Helper()
	loc, err := time.LoadLocation(name)
	if err != nil {
		tb.Fatal(err)
	}
	return loc
}

// TestGrouperWeeksMatchStudyWeek is a property test: the Grouper's cached
// week bounds must give exactly cohort.StudyWeek for every reading, in zones
// with daylight-saving changes, including ones that moved clocks at
// midnight.
func TestGrouperWeeksMatchStudyWeek(t *testing.T) {
	zones := []string{"UTC", "America/New_York", "Europe/Berlin", "America/Sao_Paulo", "America/Havana",
		"Asia/Beirut", "America/Santiago", "Australia/Lord_Howe", "Pacific/Apia", "Asia/Kolkata"}
	rng := rand.New(rand.NewPCG(21, 22))
	parts := map[string]Participant{}
	var rows []Row
	for i, z := range zones {
		id := "S-" + z
		enrolled := cohort.Date{Year: 2010 + rng.IntN(15), Month: time.Month(1 + rng.IntN(12)), Day: 1 + rng.IntN(28)}
		parts[id] = Participant{ID: int64(i + 1), Enrolled: enrolled, Loc: mustZone(t, z)}
		start := enrolled.In(mustZone(t, z)).UnixMilli()
		tt := start
		for j := 0; j < 4000; j++ {
			tt += rng.Int64N(6 * 3600 * 1000)
			rows = append(rows, Row{StudyID: id, Kind: cohort.HeartRate, T: tt, V: int32(j), Line: j})
		}
	}
	g := NewGrouper(func(id string) (Participant, bool) { p, ok := parts[id]; return p, ok }, 1<<30)
	for _, r := range rows {
		if rej := g.Add(r); rej != nil {
			t.Fatalf("Add(%+v): %v", r, rej)
		}
	}
	byID := map[int64]Participant{}
	for _, p := range parts {
		byID[p.ID] = p
	}
	n := 0
	err := g.Flush(func(gr Group) error {
		p := byID[gr.Key.Participant]
		for _, ms := range gr.Samples.T {
			if want := cohort.StudyWeek(p.Enrolled, p.Loc, time.UnixMilli(ms)); want != gr.Key.Week {
				t.Errorf("%s reading at %s filed in week %d, StudyWeek says %d", p.Loc, time.UnixMilli(ms).In(p.Loc), gr.Key.Week, want)
			}
			n++
		}
		return nil
	})
	if err != nil || n != len(rows) {
		t.Fatalf("flushed %d of %d readings, err %v", n, len(rows), err)
	}
}

func TestGrouperFlush(t *testing.T) {
	ny := mustZone(t, "America/New_York")
	enrolled := cohort.Date{Year: 2026, Month: time.March, Day: 2}
	parts := map[string]Participant{
		"S-1": {ID: 7, Enrolled: enrolled, Loc: ny},
		"S-2": {ID: 3, Enrolled: enrolled}, // no zone: UTC
	}
	lookups := 0
	lookup := func(id string) (Participant, bool) {
		lookups++
		p, ok := parts[id]
		return p, ok
	}
	at := func(s string) int64 { return mustMillis(t, s) }
	rows := []Row{
		{StudyID: "S-1", Kind: cohort.HeartRate, T: at("2026-03-02T07:16:00-05:00"), V: 61, Line: 2},
		{StudyID: "S-1", Kind: cohort.HeartRate, T: at("2026-03-02T07:15:00-05:00"), V: 60, Line: 3},
		{StudyID: "S-1", Kind: cohort.Steps, T: at("2026-03-02T07:15:00-05:00"), End: at("2026-03-02T07:16:00-05:00"), V: 10, Line: 4},
		// Sunday 23:30 in New York is Monday 04:30 UTC, still week 0 there.
		{StudyID: "S-1", Kind: cohort.HeartRate, T: at("2026-03-08T23:30:00-04:00"), V: 62, Line: 5},
		{StudyID: "S-1", Kind: cohort.HeartRate, T: at("2026-03-09T00:00:00-04:00"), V: 63, Line: 6},
		{StudyID: "S-2", Kind: cohort.RRInterval, T: at("2026-03-02T00:00:00Z"), V: 900, Line: 7},
		{StudyID: "S-9", Kind: cohort.HeartRate, T: at("2026-03-02T00:00:00Z"), V: 60, Line: 8},
		{StudyID: "S-9", Kind: cohort.HeartRate, T: at("2026-03-02T00:01:00Z"), V: 60, Line: 9},
		{StudyID: "S-2", Kind: cohort.HeartRate, T: at("2026-03-01T23:59:59Z"), V: 60, Line: 10},
	}
	g := NewGrouper(lookup, 1<<20)
	var rejs []*Rejection
	for _, r := range rows {
		if rej := g.Add(r); rej != nil {
			rejs = append(rejs, rej)
		}
	}
	if len(rejs) != 3 || rejs[0].Reason != ReasonUnknownParticipant || rejs[0].Line != 8 ||
		rejs[1].Line != 9 || rejs[2].Reason != ReasonBeforeEnrolment || rejs[2].Line != 10 {
		t.Fatalf("rejections %+v", rejs)
	}
	if rejs[0].Raw != "S-9,2026-03-02T00:00:00.000Z,heart_rate,60," {
		t.Errorf("raw = %q", rejs[0].Raw)
	}
	if lookups != 3 {
		t.Errorf("%d lookups for 3 study IDs", lookups)
	}
	if g.Len() != 6 || g.Bytes() != 4*groupBytes+5*readingBytes+stepReadingBytes {
		t.Errorf("Len %d Bytes %d", g.Len(), g.Bytes())
	}
	var got []Group
	if err := g.Flush(func(gr Group) error { got = append(got, gr); return nil }); err != nil {
		t.Fatal(err)
	}
	want := []Group{
		{GroupKey{3, 0, cohort.RRInterval}, cohort.Samples{T: []int64{rows[5].T}, V: []int32{900}}},
		{GroupKey{7, 0, cohort.HeartRate}, cohort.Samples{T: []int64{rows[1].T, rows[0].T, rows[3].T}, V: []int32{60, 61, 62}}},
		{GroupKey{7, 0, cohort.Steps}, cohort.Samples{T: []int64{rows[2].T}, V: []int32{10}, End: []int64{rows[2].End}}},
		{GroupKey{7, 1, cohort.HeartRate}, cohort.Samples{T: []int64{rows[4].T}, V: []int32{63}}},
	}
	if len(got) != len(want) {
		t.Fatalf("groups %+v", got)
	}
	for i := range want {
		if got[i].Key != want[i].Key || !sameSamples(got[i].Samples, want[i].Samples) {
			t.Errorf("group %d = %+v, want %+v", i, got[i], want[i])
		}
	}
	if g.Len() != 0 || g.Bytes() != 0 || g.OverBudget() {
		t.Errorf("after flush: Len %d Bytes %d", g.Len(), g.Bytes())
	}
}

func TestGrouperBudgetAndFailedFlush(t *testing.T) {
	p := Participant{ID: 1, Enrolled: cohort.Date{Year: 2026, Month: time.March, Day: 2}}
	g := NewGrouper(func(string) (Participant, bool) { return p, true }, 10*readingBytes+2*groupBytes)
	for i := 0; g.Len() < 1000 && !g.OverBudget(); i++ {
		week := int64(i%2) * 7 * 86400000
		g.Add(Row{StudyID: "S-1", Kind: cohort.HeartRate, T: genStart + week + int64(i)*1000, V: 60})
	}
	if !g.OverBudget() || g.Len() != 10 {
		t.Fatalf("over budget %v after %d readings, want after 10", g.OverBudget(), g.Len())
	}
	boom := errors.New("storage down")
	calls := 0
	err := g.Flush(func(Group) error {
		calls++
		if calls == 2 {
			return boom
		}
		return nil
	})
	if !errors.Is(err, boom) || g.Len() != 5 {
		t.Fatalf("err %v, %d readings held; want the second group kept", err, g.Len())
	}
	var weeks []int
	if err := g.Flush(func(gr Group) error { weeks = append(weeks, gr.Key.Week); return nil }); err != nil || len(weeks) != 1 || weeks[0] != 1 {
		t.Fatalf("retry flushed weeks %v, err %v", weeks, err)
	}
}

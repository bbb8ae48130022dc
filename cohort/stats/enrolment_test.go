package stats

import (
	"math"
	"testing"

	"cohortdesk/cohort"
	"gonum.org/v1/gonum/stat/distuv"
)

func mustDate(tb testing.TB, s string) cohort.Date {
	tb.Helper()
	d, err := cohort.ParseDate(s)
	if err != nil {
		tb.Fatal(err)
	}
	return d
}

// Hand-worked projections. The interval scenarios are checked against
// ceil(remaining / rate) with the rate's bounds from gonum's chi-square
// quantiles (reference library), so the test does not reuse our own.
func TestProjectEnrolment(t *testing.T) {
	asOf := mustDate(t, "2025-03-03")
	tests := []struct {
		name              string
		enrolled, target  int
		weekly            []int
		met, reachable    bool
		weeks             int
		date              string
		optimisticReached bool
		pessimisticReach  bool
	}{
		// 40 in 4 weeks = 10 a week; 50 remaining -> 5 weeks -> 35 days on.
		{"steady", 100, 150, []int{10, 12, 8, 10}, false, true, 5, "2025-04-07", true, true},
		// 13 in 3 weeks, 65 remaining: exactly 15 weeks (integer arithmetic;
		// floating point division would give just over 15 and so 16).
		{"exact multiple", 35, 100, []int{4, 5, 4}, false, true, 15, "2025-06-16", true, true},
		// 66 remaining: 66*3/13 = 15.23 -> 16 weeks.
		{"rounds up", 34, 100, []int{4, 5, 4}, false, true, 16, "2025-06-23", true, true},
		// No enrolments in the window: not reachable at zero rate; the
		// upper bound of the rate (3.689/4 a week) still gives a date.
		{"zero rate", 10, 15, []int{0, 0, 0, 0}, false, false, 0, "0000-00-00", true, false},
		{"target met", 150, 150, []int{3}, true, true, 0, "2025-03-03", true, true},
		{"target passed", 151, 150, []int{0, 0}, true, true, 0, "2025-03-03", true, true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := ProjectEnrolment(asOf, tt.enrolled, tt.target, tt.weekly, 0.95)
			if err != nil {
				t.Fatal(err)
			}
			e := got.Expected
			if got.Met != tt.met || e.Reachable != tt.reachable || e.Weeks != tt.weeks || e.Date.String() != tt.date {
				t.Errorf("got met %v, expected %+v (date %v); want met %v, reachable %v, %d weeks, %s",
					got.Met, e, e.Date, tt.met, tt.reachable, tt.weeks, tt.date)
			}
			if got.Optimistic.Reachable != tt.optimisticReached || got.Pessimistic.Reachable != tt.pessimisticReach {
				t.Errorf("optimistic %+v, pessimistic %+v", got.Optimistic, got.Pessimistic)
			}
			if got.Met {
				return
			}
			window, count := float64(len(tt.weekly)), float64(got.Count)
			hi := distuv.ChiSquared{K: 2*count + 2}.Quantile(0.975) / 2 / window
			wantOpt := int(math.Ceil(float64(got.Remaining) / hi))
			if got.Optimistic.Weeks != wantOpt || got.Optimistic.Date != asOf.AddDays(7*wantOpt) {
				t.Errorf("optimistic = %+v, want %d weeks at rate %v", got.Optimistic, wantOpt, hi)
			}
			if count > 0 {
				lo := distuv.ChiSquared{K: 2 * count}.Quantile(0.025) / 2 / window
				wantPess := int(math.Ceil(float64(got.Remaining) / lo))
				if got.Pessimistic.Weeks != wantPess {
					t.Errorf("pessimistic = %+v, want %d weeks at rate %v", got.Pessimistic, wantPess, lo)
				}
			}
			if got.Optimistic.Weeks > e.Weeks && e.Reachable {
				t.Errorf("optimistic %d weeks later than expected %d", got.Optimistic.Weeks, e.Weeks)
			}
		})
	}
}

// The zero-rate optimistic bound by hand: 5 remaining at 3.689/4 = 0.922 a
// week is 5.42 -> 6 weeks (3.689 from the tabulated Poisson limit, from
// memory; also -ln 0.025).
func TestProjectEnrolmentZeroRateByHand(t *testing.T) {
	got, err := ProjectEnrolment(mustDate(t, "2025-12-29"), 10, 15, []int{0, 0, 0, 0}, 0.95)
	if err != nil {
		t.Fatal(err)
	}
	if got.Optimistic.Weeks != 6 || got.Optimistic.Date.String() != "2026-02-09" {
		t.Errorf("optimistic = %+v, want 6 weeks, 2026-02-09", got.Optimistic)
	}
	if got.Expected.Reachable || got.Pessimistic.Reachable || got.Expected.RatePerWeek != 0 {
		t.Errorf("zero rate must not be reachable: %+v %+v", got.Expected, got.Pessimistic)
	}
}

func TestProjectEnrolmentInvalid(t *testing.T) {
	d := mustDate(t, "2025-01-01")
	tests := []struct {
		name             string
		enrolled, target int
		weekly           []int
		conf             float64
	}{
		{"negative enrolled", -1, 10, []int{1}, 0.95},
		{"zero target", 0, 0, []int{1}, 0.95},
		{"no weeks", 0, 10, nil, 0.95},
		{"negative week", 0, 10, []int{1, -2}, 0.95},
		{"bad conf", 0, 10, []int{1}, 2},
	}
	for _, tt := range tests {
		_, err := ProjectEnrolment(d, tt.enrolled, tt.target, tt.weekly, tt.conf)
		wantInvalid(t, tt.name, err)
	}
}

func TestAgeBands(t *testing.T) {
	b, err := NewAgeBands(50, 60, 70, 80)
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		age  int
		want string
	}{
		{18, "<50"}, {49, "<50"}, {50, "50-59"}, {59, "50-59"}, {60, "60-69"},
		{69, "60-69"}, {70, "70-79"}, {79, "70-79"}, {80, "80+"}, {104, "80+"},
	}
	for _, tt := range tests {
		if got := b.Label(tt.age); got != tt.want {
			t.Errorf("Label(%d) = %q, want %q", tt.age, got, tt.want)
		}
	}
	want := []string{"<50", "50-59", "60-69", "70-79", "80+"}
	got := b.Labels()
	if len(got) != len(want) {
		t.Fatalf("Labels = %v, want %v", got, want)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("Labels[%d] = %q, want %q", i, got[i], want[i])
		}
	}
	single, _ := NewAgeBands(65, 66)
	if got := single.Label(65); got != "65" {
		t.Errorf("one-year band = %q, want 65", got)
	}
	cuts := b.Cuts()
	cuts[0] = 1
	if b.Label(30) != "<50" {
		t.Error("Cuts must return a copy")
	}
	for _, bad := range [][]int{nil, {0}, {50, 50}, {60, 50}} {
		_, err := NewAgeBands(bad...)
		wantInvalid(t, "cuts", err)
	}
}

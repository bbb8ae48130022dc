package wear

import (
	"math/rand/v2"
	"testing"
	"time"

	"cohortdesk/cohort"
)

// mustMillis is the reference for parseInstant: the standard library's RFC
// 3339 parser.
func mustMillis(tb testing.TB, s string) int64 {
	tb.Helper()
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		tb.Fatalf("reference parse of %q: %v", s, err)
	}
	return t.UnixMilli()
}

// TestParseInstant checks accepted times against the standard library's RFC
// 3339 parser (computed: reference library) and the refusal reasons against
// the format documented in the package comment.
func TestParseInstant(t *testing.T) {
	tests := []struct {
		in   string
		want Reason // 0: accepted, checked against time.Parse
	}{
		{"2026-03-02T07:15:00-05:00", 0},
		{"2026-03-02T12:15:00Z", 0},
		{"2026-03-02T07:15:00.250-05:00", 0},
		{"2026-03-02T07:15:00.2-05:00", 0},
		{"2026-03-02T07:15:00.123456789+05:30", 0},
		{"2026-03-02T07:15:00.9999+00:00", 0},
		{"1969-12-31T23:59:59.999Z", 0}, // before the epoch: floor, as time.UnixMilli does
		{"2024-02-29T00:00:00Z", 0},
		{"0000-03-01T00:00:00Z", 0},
		{"9999-12-31T23:59:59+23:59", 0},
		{"2026-03-02T07:15:00", ReasonNoOffset},
		{"2026-03-02T07:15:00.5", ReasonNoOffset},
		{"2026-03-02", ReasonImpreciseTime},
		{"2026-03", ReasonImpreciseTime},
		{"2026", ReasonImpreciseTime},
		{"2026-13", ReasonBadTime},
		{"2026-02-30", ReasonBadTime},
		{"2025-02-29T00:00:00Z", ReasonBadTime},
		{"2026-03-02 07:15:00Z", ReasonBadTime},
		{"2026-03-02t07:15:00Z", ReasonBadTime},
		{"2026-03-02T07:15:00z", ReasonBadTime},
		{"2026-03-02T24:00:00Z", ReasonBadTime},
		{"2026-03-02T07:60:00Z", ReasonBadTime},
		{"2026-03-02T07:15:60Z", ReasonBadTime},
		{"2026-03-02T07:15:00+0500", ReasonBadTime},
		{"2026-03-02T07:15:00+24:00", ReasonBadTime},
		{"2026-03-02T07:15:00.Z", ReasonBadTime},
		{"2026-03-02T07:15Z", ReasonBadTime},
		{"", ReasonBadTime},
		{"yesterday", ReasonBadTime},
	}
	for _, tt := range tests {
		got, why := parseInstant([]byte(tt.in))
		if why != tt.want {
			t.Errorf("parseInstant(%q) reason = %v, want %v", tt.in, why, tt.want)
			continue
		}
		if why == 0 {
			if want := mustMillis(t, tt.in); got != want {
				t.Errorf("parseInstant(%q) = %d, want %d (time.Parse)", tt.in, got, want)
			}
		}
	}
}

// TestParseInstantRandom formats random instants with random offsets through
// the time package and checks they read back to the same millisecond.
func TestParseInstantRandom(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	layouts := []string{time.RFC3339, time.RFC3339Nano, "2006-01-02T15:04:05.000Z07:00"}
	for i := 0; i < 20000; i++ {
		sec := rng.Int64N(253402300799) // 0001 .. 9999
		tm := time.Unix(sec, rng.Int64N(1e9))
		off := (rng.IntN(2*1439+1) - 1439) * 60 // offsets up to ±23:59
		s := tm.In(time.FixedZone("", off)).Format(layouts[rng.IntN(len(layouts))])
		got, why := parseInstant([]byte(s))
		if why != 0 {
			t.Fatalf("parseInstant(%q) refused: %v", s, why)
		}
		if want := mustMillis(t, s); got != want {
			t.Fatalf("parseInstant(%q) = %d, want %d", s, got, want)
		}
	}
}

// TestDaysFromCivil compares day counts with time.Date (computed: reference
// library), over 2500 years including every leap-year rule.
func TestDaysFromCivil(t *testing.T) {
	for y := 0; y <= 2500; y += 7 {
		for m := 1; m <= 12; m++ {
			for _, d := range []int{1, 15, daysIn(m, y)} {
				want := time.Date(y, time.Month(m), d, 0, 0, 0, 0, time.UTC).Unix() / 86400 // exact: midnights
				if got := daysFromCivil(y, m, d); got != want {
					t.Fatalf("daysFromCivil(%d,%d,%d) = %d, want %d", y, m, d, got, want)
				}
			}
		}
	}
}

func TestParseValue(t *testing.T) {
	tests := []struct {
		in   string
		kind cohort.Kind
		want int32
		why  Reason
	}{
		{"72", cohort.HeartRate, 72, 0},
		{"72.4", cohort.HeartRate, 72, 0},
		{"72.5", cohort.HeartRate, 73, 0}, // half rounds away from zero, as documented
		{"72.49999", cohort.HeartRate, 72, 0},
		{"+72", cohort.HeartRate, 72, 0},
		{"0", cohort.HeartRate, 0, 0},
		{"-0", cohort.HeartRate, 0, 0},
		{"812.5", cohort.RRInterval, 813, 0},
		{"120", cohort.Steps, 120, 0},
		{"120.000", cohort.Steps, 120, 0},
		{"120.5", cohort.Steps, 0, ReasonNotInteger},
		{"-1", cohort.Steps, 0, ReasonOutOfRange},
		{"-0.4", cohort.HeartRate, 0, ReasonOutOfRange},
		{"2147483647", cohort.Steps, 2147483647, 0},
		{"2147483648", cohort.Steps, 0, ReasonOutOfRange},
		{"2147483646.5", cohort.HeartRate, 2147483647, 0},
		{"2147483647.5", cohort.HeartRate, 0, ReasonOutOfRange},
		{"99999999999999999999999", cohort.Steps, 0, ReasonOutOfRange},
		{"7e1", cohort.HeartRate, 0, ReasonBadNumber},
		{"72.", cohort.HeartRate, 0, ReasonBadNumber},
		{".5", cohort.HeartRate, 0, ReasonBadNumber},
		{"1,000", cohort.Steps, 0, ReasonBadNumber},
		{"sixty", cohort.HeartRate, 0, ReasonBadNumber},
		{"-", cohort.HeartRate, 0, ReasonBadNumber},
	}
	for _, tt := range tests {
		got, why := parseValue([]byte(tt.in), tt.kind)
		if got != tt.want || why != tt.why {
			t.Errorf("parseValue(%q, %v) = %d, %v; want %d, %v", tt.in, tt.kind, got, why, tt.want, tt.why)
		}
	}
}

func TestParseJSONValue(t *testing.T) {
	tests := []struct {
		in   string
		kind cohort.Kind
		want int32
		why  Reason
	}{
		{"44", cohort.HeartRate, 44, 0},
		{"4.4e1", cohort.HeartRate, 44, 0},
		{"7.25E1", cohort.HeartRate, 73, 0},
		{"1.2e2", cohort.Steps, 120, 0},
		{"1.25e1", cohort.Steps, 0, ReasonNotInteger},
		{"-1e1", cohort.Steps, 0, ReasonOutOfRange},
		{"1e400", cohort.Steps, 0, ReasonOutOfRange},
		{"3e9", cohort.Steps, 0, ReasonOutOfRange},
	}
	for _, tt := range tests {
		got, why := parseJSONValue(tt.in, tt.kind)
		if got != tt.want || why != tt.why {
			t.Errorf("parseJSONValue(%q, %v) = %d, %v; want %d, %v", tt.in, tt.kind, got, why, tt.want, tt.why)
		}
	}
}

// FuzzParseInstant checks parseInstant against time.Parse: whatever it
// accepts, the standard library accepts with the same millisecond.
func FuzzParseInstant(f *testing.F) {
	for _, s := range []string{"2026-03-02T07:15:00-05:00", "2026-03-02T12:15:00.123Z", "2026-03-02", "2026-03-02T07:15:00"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, why := parseInstant([]byte(s))
		if why != 0 {
			return
		}
		ref, err := time.Parse(time.RFC3339Nano, s)
		if err != nil {
			t.Fatalf("parseInstant(%q) accepted, time.Parse refused: %v", s, err)
		}
		if want := ref.UnixMilli(); got != want {
			t.Fatalf("parseInstant(%q) = %d, want %d", s, got, want)
		}
	})
}

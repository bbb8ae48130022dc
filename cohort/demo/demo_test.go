package demo

import (
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/risk"
)

func TestNewRejectsBadConfig(t *testing.T) {
	for _, cfg := range []Config{{Participants: -1}, {AFShare: -0.1}, {AFShare: 0.6}} {
		if _, err := New(cfg); err == nil {
			t.Errorf("New(%+v): no error", cfg)
		}
	}
}

func TestParticipantsPerSite(t *testing.T) {
	// Expected counts are the site shares 0.38, 0.34, 0.28 of n, rounded by
	// largest remainder, worked by hand: 240 -> 91.2, 81.6, 67.2 -> 91, 82, 67.
	tests := []struct {
		n    int
		want map[string]int
	}{
		{240, map[string]int{"QRW": 91, "VLM": 82, "DRF": 67}},
		{100, map[string]int{"QRW": 38, "VLM": 34, "DRF": 28}},
		{10, map[string]int{"QRW": 4, "VLM": 3, "DRF": 3}},
	}
	for _, tt := range tests {
		s := mustStudy(t, Config{Seed: 5, Participants: tt.n})
		got := map[string]int{}
		for _, p := range s.Participants {
			got[p.Site]++
		}
		for site, w := range tt.want {
			if got[site] != w {
				t.Errorf("n=%d: site %s has %d participants, want %d", tt.n, site, got[site], w)
			}
		}
		if len(s.Participants) != tt.n {
			t.Errorf("n=%d: got %d participants", tt.n, len(s.Participants))
		}
		for _, st := range s.Sites {
			if st.Target < tt.want[st.Code] {
				t.Errorf("n=%d: site %s target %d below its enrolment %d", tt.n, st.Code, st.Target, tt.want[st.Code])
			}
		}
	}
}

func TestEnrolmentAndStudyIDs(t *testing.T) {
	s := mustDefault(t)
	today := cohort.DateOf(s.Today.In(s.Loc))
	opened := map[string]cohort.Date{}
	for _, st := range s.Sites {
		opened[st.Code] = st.Opened
	}
	seen := map[string]bool{}
	for i, p := range s.Participants {
		site, seq, err := ParseStudyID(p.StudyID)
		if err != nil {
			t.Fatalf("participant %d: %v", i, err)
		}
		if site != p.Site || seq != i+1 {
			t.Errorf("%s: site %s seq %d, want %s %d", p.StudyID, site, seq, p.Site, i+1)
		}
		if seen[p.StudyID] {
			t.Errorf("%s: duplicate study ID", p.StudyID)
		}
		seen[p.StudyID] = true
		if p.Enrolled.Before(opened[p.Site]) || !p.Enrolled.Before(today) {
			t.Errorf("%s: enrolled %s outside [%s, %s)", p.StudyID, p.Enrolled, opened[p.Site], today)
		}
		if i > 0 && p.Enrolled.Before(s.Participants[i-1].Enrolled) {
			t.Errorf("%s: enrolment %s earlier than the previous participant's", p.StudyID, p.Enrolled)
		}
		if !s.workingDay(p.Enrolled) {
			t.Errorf("%s: enrolled on a non-working day %s", p.StudyID, p.Enrolled)
		}
		if got, _ := s.Participant(p.StudyID); got.StudyID != p.StudyID {
			t.Errorf("Participant(%q) not found", p.StudyID)
		}
	}
	// Sites start on different days.
	if s.Sites[0].Opened == s.Sites[1].Opened || s.Sites[1].Opened == s.Sites[2].Opened {
		t.Errorf("sites open on the same day: %v", s.Sites)
	}
}

func TestEnrolmentRampsUp(t *testing.T) {
	// A large study, so month counts are not swamped by chance. The rate grows
	// linearly over the first 60 days, so the first 30 days average about a
	// quarter of the full rate; require under half of the later months' mean.
	s := mustStudy(t, Config{Seed: 11, Participants: 3000})
	today := cohort.DateOf(s.Today.In(s.Loc))
	for _, st := range s.Sites {
		first, later := 0, 0
		for _, p := range s.Participants {
			if p.Site != st.Code {
				continue
			}
			switch d := p.Enrolled.DaysSince(st.Opened); {
			case d < 30:
				first++
			case d >= 60:
				later++
			}
		}
		months := float64(today.DaysSince(st.Opened)-60) / 30
		if mean := float64(later) / months; float64(first) >= 0.5*mean {
			t.Errorf("site %s: %d enrolments in the first 30 days, %.1f a month later; want a ramp", st.Code, first, mean)
		}
	}
}

func TestAgesIncludeTheNinetyEdge(t *testing.T) {
	s := mustDefault(t)
	today := cohort.DateOf(s.Today.In(s.Loc))
	count := map[int]int{}
	crossed := 0
	for _, p := range s.Participants {
		a := p.AgeOn(today)
		if a < 40 || a > 95 {
			t.Errorf("%s: age %d outside 40-95", p.StudyID, a)
		}
		count[a]++
		if p.AgeOn(p.Enrolled) == 89 && a == 90 {
			crossed++
		}
	}
	for _, a := range []int{89, 90, 91} {
		if count[a] < 2 {
			t.Errorf("%d participants aged %d, want at least 2", count[a], a)
		}
	}
	if crossed == 0 {
		t.Error("nobody turns 90 between enrolment and today")
	}
}

func TestAgeOn(t *testing.T) {
	tests := []struct {
		birth, on cohort.Date
		want      int
	}{
		{cohort.Date{Year: 1936, Month: 3, Day: 15}, cohort.Date{Year: 2026, Month: 3, Day: 14}, 89},
		{cohort.Date{Year: 1936, Month: 3, Day: 15}, cohort.Date{Year: 2026, Month: 3, Day: 15}, 90},
		{cohort.Date{Year: 1948, Month: 2, Day: 29}, cohort.Date{Year: 2026, Month: 2, Day: 28}, 77},
		{cohort.Date{Year: 1948, Month: 2, Day: 29}, cohort.Date{Year: 2026, Month: 3, Day: 1}, 78},
	}
	for _, tt := range tests {
		if got := ageOn(tt.birth, tt.on); got != tt.want {
			t.Errorf("ageOn(%s, %s) = %d, want %d", tt.birth, tt.on, got, tt.want)
		}
	}
}

func TestRestrictedZIPsPlanted(t *testing.T) {
	s := mustDefault(t)
	zip := regexp.MustCompile(`^[0-9]{5}$`)
	restricted := map[string]bool{}
	n := 0
	for _, p := range s.Participants {
		if !zip.MatchString(p.ZIP) {
			t.Errorf("%s: ZIP %q is not five digits", p.StudyID, p.ZIP)
		}
		if slices.Contains(deid.RestrictedZIP3(), p.ZIP[:3]) {
			restricted[p.ZIP[:3]] = true
			n++
		}
	}
	if n < 5 || len(restricted) < 4 {
		t.Errorf("%d restricted ZIP codes over %d prefixes, want at least 5 over 4", n, len(restricted))
	}
	if n > len(s.Participants)/10 {
		t.Errorf("%d of %d ZIP codes restricted, want mostly ordinary ones", n, len(s.Participants))
	}
}

func TestRestrictedZIPList(t *testing.T) {
	// HHS 2012 de-identification guidance (verified, secondary; check-values.md):
	// 17 prefixes, including 790 and 890 that some copies miss. The demo plants
	// from deid's list; deid's own test holds the whole list against the source.
	l := deid.RestrictedZIP3()
	if len(l) != 17 || !slices.Contains(l, "790") || !slices.Contains(l, "890") {
		t.Errorf("deid.RestrictedZIP3 = %v, want the 17 HHS prefixes", l)
	}
}

func TestContactDetailsAreFictional(t *testing.T) {
	s := mustDefault(t)
	phone := regexp.MustCompile(`^\([0-9]{3}\) 555-01[0-9]{2}$`)
	email := regexp.MustCompile(`^[a-z0-9.]+@example\.(org|net)$`)
	seen := map[string]string{}
	unique := func(kind, v, id string) {
		if o, ok := seen[kind+v]; ok {
			t.Errorf("%s %q shared by %s and %s", kind, v, o, id)
		}
		seen[kind+v] = id
	}
	zones := map[string]bool{}
	for _, p := range s.Participants {
		if !phone.MatchString(p.Phone) {
			t.Errorf("%s: phone %q outside the 555-01xx fiction range", p.StudyID, p.Phone)
		}
		if !email.MatchString(p.Email) {
			t.Errorf("%s: e-mail %q not at a reserved domain", p.StudyID, p.Email)
		}
		unique("phone", p.Phone, p.StudyID)
		unique("email", p.Email, p.StudyID)
		unique("serial", p.Serial, p.StudyID)
		if p.GivenName == "" || p.FamilyName == "" || p.Street == "" || p.City == "" || p.Serial == "" || p.Watch == "" {
			t.Errorf("%s: empty identifying field: %+v", p.StudyID, p)
		}
		if p.Loc == nil || p.Loc.String() != p.TimeZone {
			t.Errorf("%s: zone %q, location %v", p.StudyID, p.TimeZone, p.Loc)
		}
		zones[p.TimeZone] = true
	}
	for _, u := range s.Users {
		if !email.MatchString(u.Email) {
			t.Errorf("user %s: e-mail %q not at a reserved domain", u.Login, u.Email)
		}
	}
	if len(zones) < 3 {
		t.Errorf("participants live in %d zones, want some outside the sites' zones", len(zones))
	}
}

func TestStaffHasEveryRole(t *testing.T) {
	s := mustDefault(t)
	count := map[cohort.Role]int{}
	for _, u := range s.Users {
		count[u.Role]++
	}
	want := map[cohort.Role]int{cohort.Admin: 1, cohort.Coordinator: 2, cohort.Investigator: 1, cohort.Monitor: 1}
	for r, w := range want {
		if count[r] != w {
			t.Errorf("%d users with role %s, want %d", count[r], r, w)
		}
	}
	for _, st := range s.Sites {
		if s.coordinatorFor(st.Code) == "" {
			t.Errorf("site %s has no coordinator", st.Code)
		}
	}
}

func TestClosuresAreDistinctWorkingDays(t *testing.T) {
	s := mustDefault(t)
	seen := map[cohort.Date]bool{}
	for _, c := range s.Closures {
		wd := c.Date.In(time.UTC).Weekday()
		if wd == time.Saturday || wd == time.Sunday {
			t.Errorf("closure %q on a weekend (%s)", c.Name, c.Date)
		}
		if seen[c.Date] {
			t.Errorf("two closures on %s", c.Date)
		}
		seen[c.Date] = true
		if s.workingDay(c.Date) {
			t.Errorf("closure day %s counted as a working day", c.Date)
		}
	}
}

func TestIntakePrevalences(t *testing.T) {
	s := mustDefault(t)
	share := func(get func(Intake) risk.Answer, a risk.Answer) float64 {
		n := 0
		for _, p := range s.Participants {
			if get(p.Intake) == a {
				n++
			}
		}
		return float64(n) / float64(len(s.Participants))
	}
	htn := share(func(i Intake) risk.Answer { return i.Hypertension }, risk.Yes)
	dm := share(func(i Intake) risk.Answer { return i.Diabetes }, risk.Yes)
	hf := share(func(i Intake) risk.Answer { return i.HeartFailure }, risk.Yes)
	unknown := share(func(i Intake) risk.Answer { return i.StrokeTIA }, risk.Unknown)
	// Illustrative ranges of ours for adults of 40 to 95, not survey values.
	if htn < 0.3 || htn > 0.7 || dm < 0.05 || dm > 0.3 || hf > 0.15 || !(hf < dm && dm < htn) {
		t.Errorf("prevalences hypertension %.2f, diabetes %.2f, heart failure %.2f: implausible", htn, dm, hf)
	}
	if unknown == 0 || unknown > 0.1 {
		t.Errorf("share of unknown stroke answers %.3f, want a few", unknown)
	}
}

func TestWatchRRShare(t *testing.T) {
	s := mustDefault(t)
	n := 0
	for _, p := range s.Participants {
		if p.HasRR {
			n++
		}
	}
	if got := float64(n) / float64(len(s.Participants)); got < 0.25 || got > 0.42 {
		t.Errorf("%.2f of participants have RR-capable watches, want about a third", got)
	}
}

func TestCanaries(t *testing.T) {
	s := mustDefault(t)
	vals := s.CanaryValues()
	bySite := map[string]int{}
	byID := map[string][]Canary{}
	for _, c := range vals {
		byID[c.StudyID] = append(byID[c.StudyID], c)
	}
	today := cohort.DateOf(s.Today.In(s.Loc))
	old := false
	for id, cs := range byID {
		p, ok := s.Participant(id)
		if !ok || !p.Canary {
			t.Fatalf("canary %s is not a canary participant", id)
		}
		bySite[p.Site]++
		fields := strings.Join([]string{p.StudyID, p.GivenName, p.FamilyName, p.Phone, p.Email, p.Street,
			p.City, p.BirthDate.String(), p.ZIP, p.Serial}, "\x00")
		want := []string{"given_name", "family_name", "full_name", "phone", "phone_digits", "email", "street",
			"city", "birth_date", "birth_date_us", "zip", "serial", "study_id"}
		got := []string{}
		for _, c := range cs {
			got = append(got, c.Field)
			if c.Field != "full_name" && c.Field != "phone_digits" && c.Field != "birth_date_us" && !strings.Contains(fields, c.Value) {
				t.Errorf("canary %s field %s value %q not in the participant's fields", id, c.Field, c.Value)
			}
		}
		if !slices.Equal(got, want) {
			t.Errorf("canary %s fields %v, want %v", id, got, want)
		}
		if p.AgeOn(today) >= 90 {
			old = true
		}
	}
	if len(byID) != 3 || len(bySite) != 3 {
		t.Errorf("%d canaries over %d sites, want one per site", len(byID), len(bySite))
	}
	if !old {
		t.Error("no canary aged 90 or over")
	}
	list := s.Canaries()
	if len(list) != len(vals) {
		t.Fatalf("Canaries has %d values, CanaryValues %d", len(list), len(vals))
	}
	// No other participant carries a canary value in any field.
	for _, p := range s.Participants {
		if p.Canary {
			continue
		}
		all := strings.Join([]string{p.StudyID, p.GivenName, p.FamilyName, p.Phone, p.Email, p.Street, p.City,
			p.BirthDate.String(), p.ZIP, p.Serial}, "\x00")
		for _, c := range vals {
			if c.Field == "zip" || c.Field == "study_id" || c.Field == "birth_date" {
				continue // ordinary values that may recur by chance; compared whole below
			}
			if strings.Contains(all, c.Value) {
				t.Errorf("%s carries canary value %q", p.StudyID, c.Value)
			}
		}
		for _, c := range vals {
			if (c.Field == "zip" && p.ZIP == c.Value) || (c.Field == "birth_date" && p.BirthDate.String() == c.Value) {
				t.Errorf("%s shares canary %s %q", p.StudyID, c.Field, c.Value)
			}
		}
	}
	// Canary 0 has AF, so its referral summary can be checked for leaks.
	if c0, _ := s.Participant(vals[0].StudyID); !s.Truth(c0).HasAF() {
		t.Errorf("first canary %s has no AF episode", c0.StudyID)
	}
}

func TestAFPrevalence(t *testing.T) {
	tests := []struct {
		seed uint64
		n    int
	}{{0, 240}, {7, 240}, {3, 500}}
	for _, tt := range tests {
		s := mustStudy(t, Config{Seed: tt.seed, Participants: tt.n})
		af, ect := 0, 0
		for _, p := range s.Participants {
			tr := s.Truth(p)
			if tr.HasAF() {
				af++
			}
			for _, e := range tr.Episodes {
				if e.Kind == EpisodeEctopy {
					ect++
					break
				}
			}
			for _, e := range tr.Episodes {
				if !e.End.After(e.Start) || e.End.Sub(e.Start) > 73*time.Hour {
					t.Errorf("%s: episode %v to %v", p.StudyID, e.Start, e.End)
				}
			}
		}
		if got := float64(af) / float64(tt.n); got < 0.04 || got > 0.06 {
			t.Errorf("seed %d n %d: AF share %.3f, want 0.04-0.06", tt.seed, tt.n, got)
		}
		if ect == 0 {
			t.Errorf("seed %d n %d: no ectopy participants", tt.seed, tt.n)
		}
	}
}

func TestSmallAndOddStudies(t *testing.T) {
	// Tiny studies and other todays must not fail; the checks are only that
	// everything generated hangs together.
	for _, cfg := range []Config{
		{Participants: 1}, {Participants: 3, Seed: 9}, {Participants: 17, Seed: 2},
		{Participants: 60, Today: time.Date(2024, 3, 10, 8, 0, 0, 0, time.UTC)},
		{Participants: 60, Today: time.Date(2030, 11, 2, 23, 0, 0, 0, time.UTC), AFShare: 0.2},
	} {
		s := mustStudy(t, cfg)
		for _, f := range s.PlanFollowUps(s.ExpectedCases()) {
			if f.Final == "" {
				t.Errorf("%+v: case %+v without final state", cfg, f.Case)
			}
		}
		for _, p := range s.Participants {
			if n := s.WeekCount(p); n < 0 || n > WearWeeks {
				t.Errorf("%+v: %s has %d weeks", cfg, p.StudyID, n)
			}
		}
	}
}

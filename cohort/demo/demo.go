// Package demo generates a complete fictional screening study from a seed: a
// study with three sites, staff, about 240 participants with identifying
// details, sixteen weeks of synthetic wear data per participant, the ground
// truth behind that data (which participants had AF episodes, and when), a
// follow-up script that walks flagged cases through every case state, and a
// few deliberately bad CSV rows for the import demo.
//
// Every name, place, phone number, e-mail address, serial number and date in
// the output is invented. Names are built from syllable tables of our own;
// phone numbers use the 555-01xx range set aside for fiction; e-mail domains
// are the reserved example.org and example.net. A few "canary" participants
// carry unmistakable values in every identifying field (see Canaries), so tests
// elsewhere can prove that de-identified exports never leak them.
//
// The same Config gives byte-identical output. Nothing here reads the clock:
// "today" is part of the Config. Wear data is generated lazily, one
// participant-week at a time, from a generator keyed by (seed, participant,
// week), so weeks can be produced in any order or in parallel and memory stays
// small. A Study is read-only after New and safe for concurrent use.
//
// The synthetic signals are for exercising software, not for validating any
// screening method: the AF episodes are made deliberately easy to see.
package demo

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
)

// Defaults used when a Config field is left zero.
const (
	DefaultParticipants = 240  // the demo scenario's size
	DefaultAFShare      = 0.05 // share of participants with paroxysmal AF episodes
	WearWeeks           = 16   // weeks of wear data per participant from enrolment
)

// Calendar of the fictional study, in days relative to Config.Today. The
// recruitment start lies far enough back that early enrolees have all
// WearWeeks of data while recruitment still goes on, so the demo shows both
// complete and partial participants and a live enrolment rate.
const (
	recruitSpanDays = 280 // recruitment started this many days before today
	rampDays        = 60  // a site's enrolment rate grows linearly over this many days
	consentAmendDay = 110 // consent version 1.1 replaces 1.0 this many days after the start
)

// DefaultToday is the "today" used when Config.Today is zero, so tests and
// example files are reproducible without a clock.
func DefaultToday() time.Time { return time.Date(2026, time.October, 5, 12, 0, 0, 0, time.UTC) }

// Config says which study to generate. The zero value generates the default
// demo study with seed 0.
type Config struct {
	Seed         uint64    // same seed and config give identical output
	Participants int       // 0 means DefaultParticipants
	Today        time.Time // the generation's "now": no data, event or date lies after it; zero means DefaultToday()
	AFShare      float64   // share of participants with AF episodes; 0 means DefaultAFShare
}

// Study is a generated fictional study. Its exported fields are plain data;
// wear data, ground truth and follow-up scripts come from its methods.
type Study struct {
	Name         string         // invented study name
	Code         string         // short code of the study
	TimeZone     string         // IANA zone in which the study office works
	Loc          *time.Location // TimeZone loaded
	Today        time.Time      // Config.Today
	RecruitStart cohort.Date    // first day of recruitment (study zone)
	Sites        []Site
	Closures     []Closure // days the study office is shut (invented, not public holidays)
	Users        []User
	Participants []Participant // ordered by enrolment; Participants[i].StudyID has sequence number i+1

	seed     uint64
	afShare  float64
	plans    []plan
	byID     map[string]int
	closed   map[cohort.Date]bool
	canaries []Canary
}

// Site is a recruiting location. Places and their names are invented.
type Site struct {
	Code     string // three capital letters, the first part of every study ID at the site
	Name     string
	Town     string
	TimeZone string
	Loc      *time.Location
	Opened   cohort.Date // first day the site may enrol
	Target   int         // enrolment target
	towns    []string
	zip3     []string
	area     int // first area code of the site's phone numbers
}

// Closure is a day on which the study office does no follow-up work; staff
// actions in the follow-up script skip these days as well as weekends.
type Closure struct {
	Date cohort.Date
	Name string
}

// User is a staff member with an invented name.
type User struct {
	Login string
	Name  string
	Role  cohort.Role
	Email string   // at example.net, a reserved domain
	Sites []string // site codes a coordinator works for; empty means all
}

// siteSpec is the fixed part of each site. Every place name here is invented;
// the three-digit ZIP prefixes are ordinary ones, none on the HHS restricted
// list.
type siteSpec struct {
	code, name, zone string
	towns            []string
	zip3             []string
	openDay          int
	share            float64
	area             int
}

var siteSpecs = []siteSpec{
	{"QRW", "Quarrowden Heart Clinic", "America/Chicago",
		[]string{"Quarrowden", "Little Tessock", "Brindlemoor Cross"}, []string{"614", "615", "617"}, 0, 0.38, 274},
	{"VLM", "Velmisk Harbor Health Centre", "America/Chicago",
		[]string{"Velmisk Harbor", "Orrinsey", "Caddlereach"}, []string{"247", "248", "249"}, 28, 0.34, 527},
	{"DRF", "Drennagh Flats Community Hospital", "America/Denver",
		[]string{"Drennagh Flats", "Upper Skelloway", "Glimmerstock"}, []string{"735", "736", "738"}, 56, 0.28, 648},
}

// studyZone is where the study office sits; a region straddling a zone line
// gives the demo participants in more than one zone.
const studyZone = "America/Chicago"

// Paper is the paper the demo study prints on: its office is in the United
// States, so US Letter. The study settings hold it, and the summaries the
// demo issues are printed on it.
const Paper = followup.PaperLetter

// otherZones are where a few participants live although they enrol at a site
// (seasonal residents), so per-participant zones, including one without
// daylight saving time, are exercised.
var otherZones = []string{"America/Phoenix", "America/New_York", "America/Los_Angeles"}

// closureSpecs are invented office closure days, as offsets from the
// recruitment start; an offset on a weekend or on an earlier closure moves to
// the next working day.
var closureSpecs = []struct {
	day  int
	name string
}{
	{33, "Records system changeover"},
	{34, "Records system changeover (second day)"},
	{97, "Staff training day"},
	{151, "Office relocation"},
	{204, "Quarterly data lock"},
	{252, "Team planning retreat"},
	{recruitSpanDays + 16, "Site audit preparation"},
	{recruitSpanDays + 45, "Quarterly data lock"},
}

// staffSpecs are the invented staff.
var staffSpecs = []User{
	{Login: "opallaway", Name: "Odrin Pallaway", Role: cohort.Admin},
	{Login: "smunrowe", Name: "Sefaly Munrowe", Role: cohort.Coordinator, Sites: []string{"QRW", "VLM"}},
	{Login: "tkorrensby", Name: "Tavrin Korrensby", Role: cohort.Coordinator, Sites: []string{"DRF"}},
	{Login: "wfenwarrick", Name: "Wynnet Fenwarrick", Role: cohort.Investigator},
	{Login: "pquellstead", Name: "Perrowan Quellstead", Role: cohort.Monitor},
}

// New generates the study described by cfg. It fails only when a time zone
// cannot be loaded or the config is out of range.
func New(cfg Config) (*Study, error) {
	if cfg.Participants < 0 {
		return nil, fmt.Errorf("demo: config participants %d: must not be negative", cfg.Participants)
	}
	if cfg.AFShare < 0 || cfg.AFShare > 0.5 {
		return nil, fmt.Errorf("demo: config AF share %g: want 0 to 0.5", cfg.AFShare)
	}
	if cfg.Participants == 0 {
		cfg.Participants = DefaultParticipants
	}
	if cfg.AFShare == 0 {
		cfg.AFShare = DefaultAFShare
	}
	if cfg.Today.IsZero() {
		cfg.Today = DefaultToday()
	}
	zones := map[string]*time.Location{}
	load := func(name string) (*time.Location, error) {
		if l, ok := zones[name]; ok {
			return l, nil
		}
		l, err := time.LoadLocation(name)
		if err != nil {
			return nil, fmt.Errorf("demo: load time zone %q: %w", name, err)
		}
		zones[name] = l
		return l, nil
	}
	loc, err := load(studyZone)
	if err != nil {
		return nil, err
	}
	s := &Study{
		Name:     "Quarrow Basin Heart Rhythm Watch Study",
		Code:     "QBRW",
		TimeZone: studyZone,
		Loc:      loc,
		Today:    cfg.Today,
		seed:     cfg.Seed,
		afShare:  cfg.AFShare,
		byID:     map[string]int{},
		closed:   map[cohort.Date]bool{},
	}
	todayD := cohort.DateOf(cfg.Today.In(loc))
	s.RecruitStart = todayD.AddDays(-recruitSpanDays)
	for _, c := range closureSpecs {
		d := s.RecruitStart.AddDays(c.day)
		for !s.workingDay(d) {
			d = d.AddDays(1)
		}
		s.Closures = append(s.Closures, Closure{Date: d, Name: c.name})
		s.closed[d] = true
	}
	counts := allocate(cfg.Participants, siteSpecs)
	for i, sp := range siteSpecs {
		sl, err := load(sp.zone)
		if err != nil {
			return nil, err
		}
		// Targets sit above the enrolment so far: the study is still recruiting.
		target := (counts[i]*23 + 19) / 20
		s.Sites = append(s.Sites, Site{
			Code: sp.code, Name: sp.name, Town: sp.towns[0], TimeZone: sp.zone, Loc: sl,
			Opened: s.RecruitStart.AddDays(sp.openDay), Target: target,
			towns: sp.towns, zip3: sp.zip3, area: sp.area,
		})
	}
	for _, u := range staffSpecs {
		u.Email = u.Login + "@example.net"
		u.Sites = slices.Clone(u.Sites)
		s.Users = append(s.Users, u)
	}
	for _, z := range otherZones {
		if _, err := load(z); err != nil {
			return nil, err
		}
	}
	s.makeParticipants(counts, zones, todayD)
	return s, nil
}

// allocate splits n participants between sites by their shares (largest
// remainder), so site counts are exact and deterministic.
func allocate(n int, specs []siteSpec) []int {
	counts := make([]int, len(specs))
	rem := make([]float64, len(specs))
	left := n
	for i, sp := range specs {
		x := float64(n) * sp.share
		counts[i] = int(x)
		rem[i] = x - float64(counts[i])
		left -= counts[i]
	}
	for ; left > 0; left-- {
		best := 0
		for i := range rem {
			if rem[i] > rem[best] {
				best = i
			}
		}
		counts[best]++
		rem[best] = -1
	}
	return counts
}

// workingDay reports whether the study office works on d.
func (s *Study) workingDay(d cohort.Date) bool {
	wd := d.In(time.UTC).Weekday()
	return wd != time.Saturday && wd != time.Sunday && !s.closed[d]
}

// enrolDays draws n enrolment days for a site: working days from the site's
// opening to yesterday, with a rate that grows linearly over rampDays and then
// stays level.
func (s *Study) enrolDays(r *rand.Rand, site Site, n int, today cohort.Date) []cohort.Date {
	var days []cohort.Date
	var cum []float64
	total := 0.0
	for d := site.Opened; d.Before(today); d = d.AddDays(1) {
		if !s.workingDay(d) {
			continue
		}
		w := min(1, float64(d.DaysSince(site.Opened)+1)/rampDays)
		total += w
		days = append(days, d)
		cum = append(cum, total)
	}
	out := make([]cohort.Date, n)
	if len(days) == 0 {
		for i := range out {
			out[i] = today.AddDays(-1)
		}
		return out
	}
	for i := range out {
		x := r.Float64() * total
		j, _ := slices.BinarySearch(cum, x)
		out[i] = days[min(j, len(days)-1)]
	}
	return out
}

// Participant returns the participant with the given study ID.
func (s *Study) Participant(studyID string) (Participant, bool) {
	i, ok := s.byID[studyID]
	if !ok {
		return Participant{}, false
	}
	return s.Participants[i], true
}

// User returns the first user with the role, for callers that need "the"
// investigator or "the" monitor.
func (s *Study) User(role cohort.Role) (User, bool) {
	for _, u := range s.Users {
		if u.Role == role {
			return u, true
		}
	}
	return User{}, false
}

// coordinatorFor is the coordinator who owns cases of a site.
func (s *Study) coordinatorFor(site string) string {
	for _, u := range s.Users {
		if u.Role == cohort.Coordinator && (len(u.Sites) == 0 || slices.Contains(u.Sites, site)) {
			return u.Login
		}
	}
	return s.Users[0].Login
}

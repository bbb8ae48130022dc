package demo

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/risk"
)

// Participant is one enrolled person with the identifying details a study
// keeps. Every field except Site, Sex, Enrolled, ConsentVersion, withdrawal,
// Intake, Watch and HasRR is protected health information (PHI) and must never
// leave the system in a de-identified export; that includes StudyID, which
// exports replace with a pseudonymous code.
type Participant struct {
	StudyID          string // site code, sequence number and check letter, e.g. "QRW-0042-K"
	Site             string // site code
	GivenName        string
	FamilyName       string
	Sex              cohort.Sex
	BirthDate        cohort.Date
	ZIP              string // five digits
	Phone            string // "(NNN) 555-01NN", a range reserved for fiction
	Email            string // at example.org or example.net, reserved domains
	Street           string
	City             string // invented town
	TimeZone         string // IANA zone the participant lives in
	Loc              *time.Location
	Enrolled         cohort.Date // enrolment day; study week 0 starts here
	ConsentVersion   string
	Withdrawn        cohort.Date // zero while enrolled
	WithdrawalReason string
	Intake           Intake
	Watch            string // invented watch model
	Serial           string // the watch's serial number
	HasRR            bool   // the watch supplies beat-to-beat intervals
	Canary           bool   // carries canary values in every PHI field

	index int // position in Study.Participants, for the generator's plan
}

// AgeOn is the participant's age in whole years on day d.
func (p Participant) AgeOn(d cohort.Date) int { return ageOn(p.BirthDate, d) }

func ageOn(birth, d cohort.Date) int {
	a := d.Year - birth.Year
	if d.Month < birth.Month || (d.Month == birth.Month && d.Day < birth.Day) {
		a--
	}
	return a
}

// Intake holds the stroke-risk questions of the intake survey, so a referral
// summary can list them for physician review. Answers are risk's: yes, no, or
// unknown (not recorded).
type Intake struct {
	Hypertension risk.Answer
	Diabetes     risk.Answer
	HeartFailure risk.Answer
	StrokeTIA    risk.Answer // prior stroke, TIA or thromboembolism
	Vascular     risk.Answer // prior myocardial infarction, peripheral artery disease or aortic plaque
}

// NameParts are the syllable tables every invented personal name and street
// is joined from. Given names join one start and one end; family names a stem
// and an end; streets a stem, an end and a kind. The parts were chosen so the
// joins read as names but belong to no one in particular; they are exported so
// a test can run every name they can form through the project's list of names
// to avoid (cmd/guardrails).
type NameParts struct {
	GivenStarts, GivenEnds  []string
	FamilyStems, FamilyEnds []string
	StreetStems, StreetEnds []string
	StreetKinds             []string
}

// Names are the tables the generator draws from.
var Names = NameParts{
	GivenStarts: []string{"Ael", "Bry", "Cael", "Dov", "Eri", "Fae", "Gwi", "Hal", "Ilo", "Jas", "Kae",
		"Lor", "Mev", "Nir", "Oss", "Pel", "Quen", "Ras", "Sev", "Tam", "Ulv", "Vey", "Wyl", "Yor", "Zen"},
	GivenEnds: []string{"ra", "dan", "wen", "mir", "lis", "tor", "ny", "vel", "sa", "rin", "ona", "ett", "ric", "isse"},
	FamilyStems: []string{"Brann", "Cald", "Dunn", "Ember", "Fal", "Glen", "Harl", "Ivers", "Kest", "Lark", "Morr",
		"Nettle", "Pryn", "Quill", "Rook", "Sall", "Thorn", "Umber", "Vell", "Wex", "Yarrow", "Orm", "Tass", "Birch"},
	FamilyEnds: []string{"combe", "hallow", "mere", "stead", "thwaite", "wick", "worth", "gate", "holm", "meade", "shaw", "croft"},
	StreetStems: []string{"Amber", "Brindle", "Coppice", "Dapple", "Elder", "Fennel", "Gorse", "Heron", "Juniper",
		"Kettle", "Linden", "Marrow", "Nutmeg", "Osier", "Pebble", "Quarry", "Rushy", "Sorrel", "Teasel", "Willow"},
	StreetEnds:  []string{"field", "moor", "vale", "bank", "hollow", "mead", "down", "cote"},
	StreetKinds: []string{"Lane", "Row", "Way", "Court", "Road", "Terrace", "Walk", "Close"},
}

// Watch is an invented consumer watch model. About a third of participants
// wear one of the models that supply beat-to-beat intervals. Models are named
// as an invented maker and a model code, never in the style of a real
// vendor's product line; the list is exported so a test can check the names.
type Watch struct {
	Name   string
	Prefix string // of the serial numbers
	RR     bool   // supplies beat-to-beat intervals
	Weight float64
}

// Watches are the models participants wear, with their shares.
var Watches = []Watch{
	{"Veyra VW-30", "VW3", false, 0.36},
	{"Orbikin OK-12", "OKS", false, 0.30},
	{"Pulseloom PL-7R", "PL7", true, 0.20},
	{"Stridewell SW-24R", "SW2", true, 0.14},
}

// withdrawalReasons are invented reasons, worded as a coordinator would note them.
var withdrawalReasons = []string{
	"no longer wishes to share watch data",
	"stopped wearing the watch",
	"moved out of the study area",
	"health reasons unrelated to the study",
	"found the study calls a burden",
}

// reasonDuringFollowUp marks the participant who withdraws while a follow-up
// case is open, so the demo has a case closed by withdrawal.
const reasonDuringFollowUp = "withdrew during follow-up of a flagged week"

// Study ID alphabet for the check letter: 23 letters (no I, O, U), a prime
// count, so every single-digit error and every swap of two adjacent digits
// changes the letter.
const checkAlphabet = "ABCDEFGHJKLMNPQRSTVWXYZ"

// CheckLetter computes the check letter of a study ID body such as "QRW-0042".
// Digits count 0-9 and letters 0-25; the weighted sum (weights 1, 2, 3, ... over
// the characters, hyphens skipped) is taken modulo 23.
func CheckLetter(body string) byte {
	sum, w := 0, 0
	for i := 0; i < len(body); i++ {
		c := body[i]
		var v int
		switch {
		case c >= '0' && c <= '9':
			v = int(c - '0')
		case c >= 'A' && c <= 'Z':
			v = int(c - 'A')
		default:
			continue
		}
		w++
		sum += w * v
	}
	return checkAlphabet[sum%len(checkAlphabet)]
}

// FormatStudyID builds a study ID from a site code and a sequence number.
func FormatStudyID(site string, seq int) string {
	body := fmt.Sprintf("%s-%04d", site, seq)
	return body + "-" + string(CheckLetter(body))
}

// ParseStudyID checks a study ID's shape and check letter and returns its site
// code and sequence number. The error says which part is wrong.
func ParseStudyID(id string) (site string, seq int, err error) {
	parts := strings.Split(id, "-")
	if len(parts) != 3 {
		return "", 0, fmt.Errorf("study ID %q: want SITE-NNNN-C", id)
	}
	site, num, check := parts[0], parts[1], parts[2]
	if len(site) != 3 || strings.IndexFunc(site, func(r rune) bool { return r < 'A' || r > 'Z' }) >= 0 {
		return "", 0, fmt.Errorf("study ID %q: site code %q: want three capital letters", id, site)
	}
	if len(num) < 4 || len(num) > 6 || strings.IndexFunc(num, func(r rune) bool { return r < '0' || r > '9' }) >= 0 {
		return "", 0, fmt.Errorf("study ID %q: number %q: want 4 to 6 digits", id, num)
	}
	for _, c := range num {
		seq = seq*10 + int(c-'0')
	}
	if len(num) > 4 && num[0] == '0' {
		return "", 0, fmt.Errorf("study ID %q: number %q: leading zero beyond four digits", id, num)
	}
	if len(check) != 1 {
		return "", 0, fmt.Errorf("study ID %q: check %q: want one letter", id, check)
	}
	if want := CheckLetter(site + "-" + num); check[0] != want {
		return "", 0, fmt.Errorf("study ID %q: check letter %q does not match (mistyped?)", id, check)
	}
	return site, seq, nil
}

// enrolment is one drawn enrolment before sequence numbers are given.
type enrolment struct {
	day  cohort.Date
	site int
	draw int
}

// makeParticipants draws everyone, then makes the study-level choices (canaries,
// ages at the edge of the 90 rule, restricted ZIPs, AF, withdrawals, silences).
func (s *Study) makeParticipants(counts []int, zones map[string]*time.Location, today cohort.Date) {
	r := newRand(s.seed, streamStudy, 0, 0)
	var ens []enrolment
	for i, st := range s.Sites {
		for j, d := range s.enrolDays(r, st, counts[i], today) {
			ens = append(ens, enrolment{d, i, j})
		}
	}
	slices.SortStableFunc(ens, func(a, b enrolment) int {
		if c := a.day.DaysSince(b.day); c != 0 {
			return c
		}
		if a.site != b.site {
			return a.site - b.site
		}
		return a.draw - b.draw
	})
	emails := map[string]bool{}
	serials := map[string]bool{}
	s.Participants = make([]Participant, len(ens))
	for k, e := range ens {
		s.Participants[k] = s.person(k, e, zones, today, emails, serials)
	}

	sel := selector{r: r, taken: map[int]bool{}}
	s.chooseCanaries(&sel, today)
	s.forceAges(&sel, today)
	s.plantRestrictedZIPs(&sel)
	s.plans = make([]plan, len(s.Participants))
	for k := range s.Participants {
		s.plans[k] = s.basePlan(k)
	}
	s.chooseConditions(&sel, today)
	for k, p := range s.Participants {
		s.byID[p.StudyID] = k
	}
}

// person draws the ordinary fields of participant k.
func (s *Study) person(k int, e enrolment, zones map[string]*time.Location, today cohort.Date, emails, serials map[string]bool) Participant {
	r := newRand(s.seed, streamPerson, uint64(k), 0)
	st := s.Sites[e.site]
	p := Participant{
		StudyID:  FormatStudyID(st.Code, k+1),
		Site:     st.Code,
		Enrolled: e.day,
		index:    k,
	}
	p.GivenName = Names.GivenStarts[r.IntN(len(Names.GivenStarts))] + Names.GivenEnds[r.IntN(len(Names.GivenEnds))]
	p.FamilyName = Names.FamilyStems[r.IntN(len(Names.FamilyStems))] + Names.FamilyEnds[r.IntN(len(Names.FamilyEnds))]
	switch x := r.Float64(); {
	case x < 0.52:
		p.Sex = cohort.Female
	case x < 0.99:
		p.Sex = cohort.Male
	default:
		p.Sex = cohort.Unknown
	}
	age := int(math.Round(66 + 9.5*r.NormFloat64()))
	if r.Float64() < 0.1 {
		age = betweenInt(r, 40, 95)
	}
	age = max(40, min(95, age))
	p.BirthDate = birthFor(r, age, today)
	p.ZIP = st.zip3[r.IntN(len(st.zip3))] + fmt.Sprintf("%02d", r.IntN(100))
	// Phone numbers are handed out in order so they are unique: one area code
	// per hundred participants, lines 555-0100 to 555-0199.
	area := 200 + (k/100*263+st.area)%800
	p.Phone = fmt.Sprintf("(%03d) 555-01%02d", area, k%100)
	domain := "example.org"
	if r.IntN(3) == 0 {
		domain = "example.net"
	}
	local := strings.ToLower(p.GivenName + "." + p.FamilyName)
	p.Email = local + "@" + domain
	for n := 2; emails[p.Email]; n++ {
		p.Email = fmt.Sprintf("%s%d@%s", local, n, domain)
	}
	emails[p.Email] = true
	p.Street = fmt.Sprintf("%d %s%s %s", betweenInt(r, 2, 4980),
		Names.StreetStems[r.IntN(len(Names.StreetStems))], Names.StreetEnds[r.IntN(len(Names.StreetEnds))], Names.StreetKinds[r.IntN(len(Names.StreetKinds))])
	p.City = st.towns[pick(r, []float64{0.6, 0.25, 0.15})]
	p.TimeZone = st.TimeZone
	if r.Float64() < 0.06 {
		p.TimeZone = otherZones[r.IntN(len(otherZones))]
	}
	p.Loc = zones[p.TimeZone]
	p.ConsentVersion = "1.0"
	if !e.day.Before(s.RecruitStart.AddDays(consentAmendDay)) {
		p.ConsentVersion = "1.1"
	}
	p.Intake = drawIntake(r, age, p.Sex)
	wm := Watches[pick(r, []float64{Watches[0].Weight, Watches[1].Weight, Watches[2].Weight, Watches[3].Weight})]
	p.Watch, p.HasRR = wm.Name, wm.RR
	for {
		p.Serial = wm.Prefix + "-" + base32(r, 4) + "-" + base32(r, 4)
		if !serials[p.Serial] {
			break
		}
	}
	serials[p.Serial] = true
	return p
}

// birthFor draws a birth date giving exactly age full years on today.
func birthFor(r *rand.Rand, age int, today cohort.Date) cohort.Date {
	hi := cohort.DateOf(today.In(time.UTC).AddDate(-age, 0, 0))
	lo := cohort.DateOf(today.In(time.UTC).AddDate(-age-1, 0, 1))
	span := hi.DaysSince(lo)
	for range 4 {
		b := lo.AddDays(r.IntN(span + 1))
		if ageOn(b, today) == age {
			return b
		}
	}
	return hi
}

// drawIntake draws intake answers with prevalences that rise with age. The
// rates are illustrative choices of ours, of the order seen in older adults;
// they are not taken from a survey.
func drawIntake(r *rand.Rand, age int, sex cohort.Sex) Intake {
	a := float64(age - 40)
	male := 1.0
	if sex == cohort.Male {
		male = 1.3
	}
	ans := func(p float64) risk.Answer {
		if r.Float64() < 0.04 {
			return risk.Unknown
		}
		if r.Float64() < p {
			return risk.Yes
		}
		return risk.No
	}
	return Intake{
		Hypertension: ans(0.25 + 0.006*a),
		Diabetes:     ans(0.10 + 0.002*a),
		HeartFailure: ans(0.01 + 0.0012*a),
		StrokeTIA:    ans(0.015 + 0.001*a),
		Vascular:     ans((0.04 + 0.0025*a) * male),
	}
}

// base32 draws n characters from an alphabet without I, L, O and U, as serial
// numbers printed on devices often avoid them.
func base32(r *rand.Rand, n int) string {
	const alpha = "0123456789ABCDEFGHJKMNPQRSTVWXYZ"
	b := make([]byte, n)
	for i := range b {
		b[i] = alpha[r.IntN(len(alpha))]
	}
	return string(b)
}

// selector picks participants for study-level roles without giving anyone two
// conflicting roles.
type selector struct {
	r     *rand.Rand
	taken map[int]bool
}

// choose picks up to n untaken participants that pass ok, with weights from
// weight (nil means equal), and marks them taken when mark is set.
func (sel *selector) choose(n, total int, ok func(int) bool, weight func(int) float64, mark bool) []int {
	var cand []int
	var ws []float64
	for k := range total {
		if !sel.taken[k] && ok(k) {
			cand = append(cand, k)
			w := 1.0
			if weight != nil {
				w = weight(k)
			}
			ws = append(ws, w)
		}
	}
	var out []int
	for len(out) < n && len(cand) > 0 {
		j := pick(sel.r, ws)
		out = append(out, cand[j])
		cand = slices.Delete(cand, j, j+1)
		ws = slices.Delete(ws, j, j+1)
	}
	slices.Sort(out)
	if mark {
		for _, k := range out {
			sel.taken[k] = true
		}
	}
	return out
}

// forceAges gives a handful of participants ages 89, 90 and 91, and one a
// 90th birthday between enrolment and today, so the "90 or older" rule of
// de-identification meets every edge.
func (s *Study) forceAges(sel *selector, today cohort.Date) {
	n := len(s.Participants)
	for _, age := range []int{89, 89, 90, 90, 91, 91} {
		for _, k := range sel.choose(1, n, func(int) bool { return true }, nil, true) {
			s.Participants[k].BirthDate = birthFor(sel.r, age, today)
		}
	}
	ks := sel.choose(1, n, func(k int) bool { return today.DaysSince(s.Participants[k].Enrolled) >= 30 }, nil, true)
	for _, k := range ks {
		p := &s.Participants[k]
		span := today.DaysSince(p.Enrolled)
		birthday90 := p.Enrolled.AddDays(1 + sel.r.IntN(span))
		b := cohort.DateOf(birthday90.In(time.UTC).AddDate(-90, 0, 0))
		if b.Month == time.March && b.Day == 1 && birthday90.Month == time.February {
			b = cohort.Date{Year: b.Year, Month: time.February, Day: 28}
		}
		p.BirthDate = b
	}
}

// plantRestrictedZIPs gives a few participants ZIP codes in restricted areas
// (the prefixes Safe Harbor de-identification must replace by 000, listed in
// cohort/deid), cycling through the list from a random start so many prefixes
// appear.
func (s *Study) plantRestrictedZIPs(sel *selector) {
	n := len(s.Participants)
	m := min(n, max(5, n/30))
	restricted := deid.RestrictedZIP3()
	start := sel.r.IntN(len(restricted))
	for i, k := range sel.choose(m, n, func(k int) bool { return !s.Participants[k].Canary }, nil, false) {
		s.Participants[k].ZIP = restricted[(start+i)%len(restricted)] + fmt.Sprintf("%02d", sel.r.IntN(100))
	}
}

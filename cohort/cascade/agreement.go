package cascade

import (
	"slices"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/stats"
)

// Group is one row of the agreement statistics: the flagged episodes
// (cases) of one protocol version and subgroup.
type Group struct {
	Dimension string // "all", "protocol", "site", "sex" or "age band"
	Label     string
	// The episode counts are the cascade's case boxes for the same rows:
	// Flagged is screen_positive, WithRecording recording_returned, OverRead
	// over_read and Confirmed af_confirmed.
	Flagged       int
	WithRecording int
	OverRead      int
	Confirmed     int
	// PPV of the flag: Confirmed / OverRead, the episodes with a settled
	// interpretable over-read (diagnostic length), with Wilson and
	// Clopper-Pearson intervals (stats.ProportionCI). The intervals are
	// zero when OverRead is 0.
	PPV    stats.Fraction
	Wilson stats.Interval
	Exact  stats.Interval
	// Uninterpretable reports separately the episodes whose settled readings
	// are only "uninterpretable" (no diagnostic over-read), out of Read, the
	// episodes with any settled reading.
	Uninterpretable stats.Fraction
	// Time from flag to over-read in days (flag day to the day the first
	// diagnostic conclusion was settled); episodes without one are censored
	// at their closing day, or at the as-of day while open.
	Median   stats.Median
	Events   int
	Censored int
}

// Kappa compares the recorder's automatic interpretation (rows) with the
// settled over-read (columns) in overread.Categories, over recordings of at
// least 30 s that have both.
type Kappa struct {
	Categories []overread.Category
	Table      [][]int
	N          int
	Kappa      stats.Kappa
	CI         stats.Interval
	Err        string // why kappa is not given (no recordings, or undefined)
}

// Agreement is how well the flag predicts AF and how the recorder agrees with
// the over-readers, for one protocol version.
type Agreement struct {
	Protocol  ProtocolRef
	Versions  []ProtocolRef // every version, for choosing
	AsOf      cohort.Date
	Conf      float64
	ByVersion []Group     // one row per version, all subgroups together
	Groups    []Group     // the chosen version: all, then by site, sex and age band
	Curve     stats.Curve // time from flag to over-read, the chosen version's episodes
	Kappa     Kappa
}

// Conf is the confidence level of every interval of the agreement statistics.
const Conf = 0.95

// ageNotRecorded is the age band of participants without a recorded age.
const ageNotRecorded = "age not recorded"

// Agreement computes the agreement statistics for the rows' chosen protocol
// version (with its subgroups) and for every version.
func (rs Rows) Agreement() (Agreement, error) {
	out := Agreement{Protocol: rs.Protocol, Versions: rs.Versions, AsOf: rs.AsOf, Conf: Conf}
	people := make(map[int64]Person, len(rs.People))
	for _, p := range rs.People {
		people[p.ID] = p
	}
	for _, v := range rs.Versions {
		g, _, err := rs.group("protocol", v.Label(), func(e Episode) bool { return e.ProtocolID == v.ID })
		if err != nil {
			return out, err
		}
		out.ByVersion = append(out.ByVersion, g)
	}
	of := func(e Episode) bool { return e.ProtocolID == rs.Protocol.ID }
	all, curve, err := rs.group("all", "all", of)
	if err != nil {
		return out, err
	}
	out.Groups, out.Curve = append(out.Groups, all), curve
	type sub struct{ dim, label string }
	var subs []sub
	seen := map[sub]bool{}
	add := func(s sub) {
		if !seen[s] {
			seen[s] = true
			subs = append(subs, s)
		}
	}
	var sites []string
	for _, p := range rs.People {
		if !slices.Contains(sites, p.Site) {
			sites = append(sites, p.Site)
		}
	}
	slices.Sort(sites)
	for _, s := range sites {
		add(sub{"site", s})
	}
	for _, s := range []cohort.Sex{cohort.Female, cohort.Male, cohort.Unknown} {
		add(sub{"sex", s.Label()})
	}
	for _, l := range deid.AgeBandLabels() {
		add(sub{"age band", l})
	}
	add(sub{"age band", ageNotRecorded})
	key := func(p Person, dim string) string {
		switch dim {
		case "site":
			return p.Site
		case "sex":
			return p.Sex.Label()
		}
		if p.Age == nil {
			return ageNotRecorded
		}
		return deid.AgeBand(*p.Age)
	}
	for _, sg := range subs {
		g, _, err := rs.group(sg.dim, sg.label, func(e Episode) bool { return of(e) && key(people[e.ParticipantID], sg.dim) == sg.label })
		if err != nil {
			return out, err
		}
		if g.Flagged == 0 && (sg.dim == "sex" && sg.label == cohort.Unknown.Label() || sg.label == ageNotRecorded) {
			continue // keep the table short when nobody lacks the value
		}
		out.Groups = append(out.Groups, g)
	}
	out.Kappa = rs.kappa(of)
	return out, nil
}

// group computes one row of the statistics over the episodes that match.
func (rs Rows) group(dim, label string, match func(Episode) bool) (Group, stats.Curve, error) {
	g := Group{Dimension: dim, Label: label}
	var obs []stats.Obs
	read, uninterp := 0, 0
	for _, e := range rs.Episodes {
		if !match(e) {
			continue
		}
		st := e.stage()
		g.Flagged++
		if st >= StageRecording {
			g.WithRecording++
		}
		if st >= StageOverRead {
			g.OverRead++
		}
		if st >= StageConfirmed {
			g.Confirmed++
		}
		anySettled, onlyUninterp := false, true
		for _, r := range e.Recordings {
			if r.Conclusion.Final {
				anySettled = true
				if r.Conclusion.Rhythm != overread.Uninterpretable {
					onlyUninterp = false
				}
			}
		}
		if anySettled {
			read++
			if onlyUninterp && st < StageOverRead {
				uninterp++
			}
		}
		flagDay := cohort.DateOf(e.Flagged.In(rs.Loc))
		if d, ok := e.firstDiagnostic(); ok {
			obs = append(obs, stats.Obs{Time: float64(max(0, d.DaysSince(flagDay))), Event: true})
			continue
		}
		end := rs.AsOf
		if e.State.Terminal() && !e.ClosedAt.IsZero() {
			end = cohort.DateOf(e.ClosedAt.In(rs.Loc))
		}
		obs = append(obs, stats.Obs{Time: float64(max(0, end.DaysSince(flagDay))), Event: false})
	}
	g.PPV = stats.Fraction{X: g.Confirmed, N: g.OverRead}
	g.Uninterpretable = stats.Fraction{X: uninterp, N: read}
	if g.OverRead > 0 {
		var err error
		if g.Wilson, err = g.PPV.CI(stats.Wilson, Conf); err != nil {
			return g, stats.Curve{}, err
		}
		if g.Exact, err = g.PPV.CI(stats.ClopperPearson, Conf); err != nil {
			return g, stats.Curve{}, err
		}
	}
	curve, err := stats.KaplanMeier(obs, Conf)
	if err != nil {
		return g, curve, err
	}
	g.Median, g.Events, g.Censored = curve.Median(), curve.Events, curve.N-curve.Events
	return g, curve, nil
}

// kappa tabulates automatic interpretation against settled over-read.
func (rs Rows) kappa(match func(Episode) bool) Kappa {
	cats := overread.Categories()
	k := Kappa{Categories: cats, Table: make([][]int, len(cats))}
	for i := range k.Table {
		k.Table[i] = make([]int, len(cats))
	}
	index := func(c overread.Category) int { return slices.Index(cats, c) }
	for _, e := range rs.Episodes {
		if !match(e) {
			continue
		}
		for _, r := range e.Recordings {
			a, okA := overread.AutoCategory(r.Auto)
			b, okB := overread.RhythmCategory(r.Conclusion.Rhythm)
			if !okA || !okB || !r.Conclusion.Final || r.TooShort {
				continue
			}
			k.Table[index(a)][index(b)]++
			k.N++
		}
	}
	if k.N == 0 {
		k.Err = "no recording of at least 30 s has both an automatic interpretation and a settled over-read yet"
		return k
	}
	var err error
	if k.Kappa, err = stats.CohenKappa(k.Table); err != nil {
		k.Err = "kappa is undefined for this table (both raters used a single category)"
		return k
	}
	if k.CI, err = k.Kappa.CI(Conf); err != nil {
		k.Err = err.Error()
	}
	return k
}

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

// GroupKey is the subgroup an episode counts in: its version and its
// participant's site (code), sex and age band (AgeBand).
type GroupKey struct {
	ProtocolID int
	Site       string
	Sex        cohort.Sex
	AgeBand    string
}

// StageCount is N episodes of one subgroup with the same stage and readings.
type StageCount struct {
	Key                      GroupKey
	Stage                    Stage
	Settled, Uninterpretable bool
	N                        int
}

// TimeCount is N episodes of one subgroup with the same follow-up: an event
// or a close Days after the flag, or (neither) still open since FlagDay.
type TimeCount struct {
	Key           GroupKey
	Event, Closed bool
	Days          int
	FlagDay       cohort.Date // open episodes only
	N             int
}

// KappaCount is N recordings of a version's episodes in one cell of the kappa
// table (Recording.KappaCell).
type KappaCount struct {
	ProtocolID   int
	Auto, Rhythm overread.Category
	N            int
}

// Sums are the agreement statistics' inputs as sums over the chosen
// participants' episodes of every version, the way storage keeps them.
type Sums struct {
	Protocol ProtocolRef   // the chosen version (ChooseProtocol)
	Versions []ProtocolRef // every version
	AsOf     cohort.Date   // open episodes are censored at this day
	Sites    []string      // the sites of the chosen participants
	Stages   []StageCount
	Times    []TimeCount
	Kappa    []KappaCount
}

// Sums adds up the rows' episodes by subgroup, each counted by
// Episode.Figure, and their recordings by Recording.KappaCell.
func (rs Rows) Sums() Sums {
	out := Sums{Protocol: rs.Protocol, Versions: rs.Versions, AsOf: rs.AsOf}
	people := make(map[int64]Person, len(rs.People))
	for _, p := range rs.People {
		people[p.ID] = p
		if !slices.Contains(out.Sites, p.Site) {
			out.Sites = append(out.Sites, p.Site)
		}
	}
	for _, e := range rs.Episodes {
		p := people[e.ParticipantID]
		key := GroupKey{ProtocolID: e.ProtocolID, Site: p.Site, Sex: p.Sex, AgeBand: AgeBand(p.Age)}
		f := e.Figure(rs.Loc)
		out.Stages = append(out.Stages, StageCount{Key: key, Stage: f.Stage, Settled: f.Settled, Uninterpretable: f.Uninterpretable, N: 1})
		tc := TimeCount{Key: key, Event: f.Event, Closed: f.Closed, Days: f.Days, N: 1}
		if !f.Event && !f.Closed {
			tc.FlagDay = f.FlagDay
		}
		out.Times = append(out.Times, tc)
		for _, r := range e.Recordings {
			if a, b, ok := r.KappaCell(); ok {
				out.Kappa = append(out.Kappa, KappaCount{ProtocolID: e.ProtocolID, Auto: a, Rhythm: b, N: 1})
			}
		}
	}
	return out
}

// Agreement computes the agreement statistics for the rows' chosen protocol
// version (with its subgroups) and for every version: the statistics of
// rs.Sums().
func (rs Rows) Agreement() (Agreement, error) { return rs.Sums().Agreement() }

// Agreement computes the agreement statistics for the chosen version (with
// its subgroups) and for every version.
func (s Sums) Agreement() (Agreement, error) {
	out := Agreement{Protocol: s.Protocol, Versions: s.Versions, AsOf: s.AsOf, Conf: Conf}
	for _, v := range s.Versions {
		g, _, err := s.group("protocol", v.Label(), func(k GroupKey) bool { return k.ProtocolID == v.ID })
		if err != nil {
			return out, err
		}
		out.ByVersion = append(out.ByVersion, g)
	}
	of := func(k GroupKey) bool { return k.ProtocolID == s.Protocol.ID }
	all, curve, err := s.group("all", "all", of)
	if err != nil {
		return out, err
	}
	out.Groups, out.Curve = append(out.Groups, all), curve
	type sub struct{ dim, label string }
	var subs []sub
	sites := slices.Clone(s.Sites)
	slices.Sort(sites)
	sites = slices.Compact(sites)
	for _, st := range sites {
		subs = append(subs, sub{"site", st})
	}
	for _, sx := range []cohort.Sex{cohort.Female, cohort.Male, cohort.Unknown} {
		subs = append(subs, sub{"sex", sx.Label()})
	}
	for _, l := range deid.AgeBandLabels() {
		subs = append(subs, sub{"age band", l})
	}
	subs = append(subs, sub{"age band", AgeNotRecorded})
	key := func(k GroupKey, dim string) string {
		switch dim {
		case "site":
			return k.Site
		case "sex":
			return k.Sex.Label()
		}
		return k.AgeBand
	}
	for _, sg := range subs {
		g, _, err := s.group(sg.dim, sg.label, func(k GroupKey) bool { return of(k) && key(k, sg.dim) == sg.label })
		if err != nil {
			return out, err
		}
		if g.Flagged == 0 && (sg.dim == "sex" && sg.label == cohort.Unknown.Label() || sg.label == AgeNotRecorded) {
			continue // keep the table short when nobody lacks the value
		}
		out.Groups = append(out.Groups, g)
	}
	out.Kappa = s.kappa(s.Protocol.ID)
	return out, nil
}

// group computes one row of the statistics over the episodes whose subgroup
// matches.
func (s Sums) group(dim, label string, match func(GroupKey) bool) (Group, stats.Curve, error) {
	g := Group{Dimension: dim, Label: label}
	read, uninterp := 0, 0
	for _, c := range s.Stages {
		if !match(c.Key) {
			continue
		}
		g.Flagged += c.N
		if c.Stage >= StageRecording {
			g.WithRecording += c.N
		}
		if c.Stage >= StageOverRead {
			g.OverRead += c.N
		}
		if c.Stage >= StageConfirmed {
			g.Confirmed += c.N
		}
		if c.Settled {
			read += c.N
		}
		if c.Uninterpretable {
			uninterp += c.N
		}
	}
	var tallies []stats.Tally
	for _, c := range s.Times {
		if !match(c.Key) || c.N == 0 {
			continue
		}
		switch {
		case c.Event:
			tallies = append(tallies, stats.Tally{Time: float64(c.Days), Events: c.N})
		case c.Closed:
			tallies = append(tallies, stats.Tally{Time: float64(c.Days), Censored: c.N})
		default:
			tallies = append(tallies, stats.Tally{Time: float64(OpenDays(c.FlagDay, s.AsOf)), Censored: c.N})
		}
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
	curve, err := stats.KaplanMeierTallies(tallies, Conf)
	if err != nil {
		return g, curve, err
	}
	g.Median, g.Events, g.Censored = curve.Median(), curve.Events, curve.N-curve.Events
	return g, curve, nil
}

// kappa tabulates automatic interpretation against settled over-read for the
// recordings of one version's episodes.
func (s Sums) kappa(protocolID int) Kappa {
	cats := overread.Categories()
	k := Kappa{Categories: cats, Table: make([][]int, len(cats))}
	for i := range k.Table {
		k.Table[i] = make([]int, len(cats))
	}
	for _, c := range s.Kappa {
		if c.ProtocolID != protocolID || c.N == 0 {
			continue
		}
		a, b := slices.Index(cats, c.Auto), slices.Index(cats, c.Rhythm)
		if a < 0 || b < 0 {
			continue
		}
		k.Table[a][b] += c.N
		k.N += c.N
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

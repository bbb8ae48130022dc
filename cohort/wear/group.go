package wear

import (
	"fmt"
	"sort"
	"time"

	"cohortdesk/cohort"
)

// Participant is what grouping needs to know about the person a study ID
// names: the key to store under, and the enrolment day and time zone that
// define their study weeks.
type Participant struct {
	ID       int64
	Enrolled cohort.Date
	Loc      *time.Location // nil means UTC
}

// Lookup finds the participant for a study ID; false when there is none.
// Grouper calls it once per distinct study ID and remembers the answer.
type Lookup func(studyID string) (Participant, bool)

// GroupKey names one stored series: a participant's readings of one kind in
// one study week.
type GroupKey struct {
	Participant int64
	Week        int
	Kind        cohort.Kind
}

// Group is one flushed series, sorted in (time, value, end) order.
type Group struct {
	Key     GroupKey
	Samples cohort.Samples
}

// Approximate memory cost of what a Grouper holds, for its budget: the
// columns' bytes per reading, and a map entry plus slice headers per group.
const (
	readingBytes     = 12 // T int64 + V int32
	stepReadingBytes = 20 // plus End int64
	groupBytes       = 128
)

// Grouper sorts parsed rows into participant-week-kind series under a memory
// budget. Add rows as they are read; when OverBudget reports true (or at the
// end of the input), Flush hands every series to the caller and starts
// afresh. A long import therefore flushes the same participant-week more
// than once; each flush is a partial series that the storage layer merges
// into what it has (see Merge), which is also what makes re-imports
// harmless.
type Grouper struct {
	lookup Lookup
	budget int
	parts  map[string]*pstate
	groups map[GroupKey]*cohort.Samples
	free   []*cohort.Samples // emptied series from the last Flush, for reuse
	epoch  int               // counts flushes, to invalidate pstate.grp
	lastID string
	lastP  *pstate
	bytes  int
	n      int
}

type pstate struct {
	p        Participant
	ok       bool
	loc      *time.Location
	week     int
	from, to int64 // [from, to) in Unix ms is study week `week`
	// The series of one week by kind, so the common run of one
	// participant's rows finds its series without a map lookup.
	grpWeek  int
	grpEpoch int
	grp      [cohort.RRInterval + 1]*cohort.Samples
}

// NewGrouper groups rows, asking lookup about each new study ID, and reports
// itself over budget when it holds about budget bytes of readings.
func NewGrouper(lookup Lookup, budget int) *Grouper {
	return &Grouper{
		lookup: lookup,
		budget: budget,
		parts:  make(map[string]*pstate),
		groups: make(map[GroupKey]*cohort.Samples),
	}
}

// Add files one row under its participant, week and kind. It refuses rows
// whose study ID names no participant, and rows from before the enrolment
// day: consent covers wear data from enrolment on. The rejection's File is
// empty (the caller knows which file the row came from) and its Raw is the
// row written back in the readings CSV format.
func (g *Grouper) Add(r Row) *Rejection {
	ps := g.lastP
	if ps == nil || r.StudyID != g.lastID {
		ps = g.parts[r.StudyID]
		if ps == nil {
			p, ok := g.lookup(r.StudyID)
			ps = &pstate{p: p, ok: ok, loc: p.Loc}
			if ps.loc == nil {
				ps.loc = time.UTC
			}
			g.parts[r.StudyID] = ps
		}
		g.lastID, g.lastP = r.StudyID, ps
	}
	if !ps.ok {
		return rowRejection(r, ReasonUnknownParticipant, "study_id", fmt.Sprintf("study_id %q is not enrolled in this study", r.StudyID))
	}
	if r.Kind < cohort.HeartRate || r.Kind > cohort.RRInterval {
		return rowRejection(r, ReasonUnknownKind, "kind", fmt.Sprintf("kind %d is not a wear reading kind", r.Kind))
	}
	w := ps.weekOf(r.T)
	if w < 0 {
		return rowRejection(r, ReasonBeforeEnrolment, "time",
			fmt.Sprintf("reading at %s is before enrolment on %s", time.UnixMilli(r.T).In(ps.loc).Format(time.RFC3339), ps.p.Enrolled))
	}
	if ps.grpWeek != w || ps.grpEpoch != g.epoch {
		ps.grp = [cohort.RRInterval + 1]*cohort.Samples{}
		ps.grpWeek, ps.grpEpoch = w, g.epoch
	}
	s := ps.grp[r.Kind]
	if s == nil {
		key := GroupKey{Participant: ps.p.ID, Week: w, Kind: r.Kind}
		s = g.groups[key]
		if s == nil {
			s = g.newSeries()
			g.groups[key] = s
			g.bytes += groupBytes
		}
		ps.grp[r.Kind] = s
	}
	if r.Kind == cohort.Steps {
		s.AppendInterval(r.T, r.End, r.V)
		g.bytes += stepReadingBytes
	} else {
		s.Append(r.T, r.V)
		g.bytes += readingBytes
	}
	g.n++
	return nil
}

// newSeries takes an emptied series from the last flush when there is one:
// reusing its memory saves growing fresh slices, which otherwise costs more
// than parsing the rows.
func (g *Grouper) newSeries() *cohort.Samples {
	if n := len(g.free); n > 0 {
		s := g.free[n-1]
		g.free = g.free[:n-1]
		return s
	}
	return &cohort.Samples{T: make([]int64, 0, 64), V: make([]int32, 0, 64)}
}

// weekOf is cohort.StudyWeek with the current week's bounds remembered, since
// rows come in long runs of one participant's week and the zone arithmetic
// costs far more than parsing a row.
func (ps *pstate) weekOf(t int64) int {
	if t >= ps.from && t < ps.to {
		return ps.week
	}
	w := cohort.StudyWeek(ps.p.Enrolled, ps.loc, time.UnixMilli(t))
	start, end := cohort.WeekBounds(ps.p.Enrolled, ps.loc, w)
	from, to := start.UnixMilli(), end.UnixMilli()
	// Keep the bounds only when both ends agree with StudyWeek, so a zone
	// whose midnight is skipped or repeated can never widen the cached week.
	if t >= from && t < to &&
		cohort.StudyWeek(ps.p.Enrolled, ps.loc, time.UnixMilli(from)) == w &&
		cohort.StudyWeek(ps.p.Enrolled, ps.loc, time.UnixMilli(to-1)) == w {
		ps.from, ps.to, ps.week = from, to, w
	}
	return w
}

// Bytes is the approximate memory the held readings take.
func (g *Grouper) Bytes() int { return g.bytes }

// Len is the number of readings held.
func (g *Grouper) Len() int { return g.n }

// OverBudget reports whether it is time to Flush.
func (g *Grouper) OverBudget() bool { return g.bytes >= g.budget }

// Flush hands every held series to emit, ordered by participant, week and
// kind, each sorted in (time, value, end) order, then forgets them. The
// Samples passed to emit are valid only until emit returns: their memory is
// reused for the next series (merge or encode them inside emit, or copy
// them). If emit fails, Flush stops and returns the error; the series not yet
// handed over stay held.
//
// Memory in use can reach about twice the budget: slices grow by doubling,
// and emptied slices are kept for reuse.
func (g *Grouper) Flush(emit func(Group) error) error {
	keys := make([]GroupKey, 0, len(g.groups))
	for k := range g.groups {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool {
		a, b := keys[i], keys[j]
		if a.Participant != b.Participant {
			return a.Participant < b.Participant
		}
		if a.Week != b.Week {
			return a.Week < b.Week
		}
		return a.Kind < b.Kind
	})
	g.epoch++
	for _, k := range keys {
		s := g.groups[k]
		if !isOrdered(s) {
			SortSamples(s)
		}
		if err := emit(Group{Key: k, Samples: *s}); err != nil {
			return err
		}
		delete(g.groups, k)
		per := readingBytes
		if k.Kind == cohort.Steps {
			per = stepReadingBytes
		}
		g.bytes -= groupBytes + per*s.Len()
		g.n -= s.Len()
		s.T, s.V, s.End = s.T[:0], s.V[:0], s.End[:0]
		g.free = append(g.free, s)
	}
	return nil
}

func isOrdered(s *cohort.Samples) bool {
	for i := 1; i < len(s.T); i++ {
		if less(s.T[i], s.V[i], endAt(*s, i), s.T[i-1], s.V[i-1], endAt(*s, i-1)) {
			return false
		}
	}
	return true
}

func rowRejection(r Row, why Reason, field, msg string) *Rejection {
	return &Rejection{Reason: why, Line: r.Line, Entry: -1, Offset: -1, Field: field, Msg: msg, Raw: FormatRow(r)}
}

// FormatRow writes a row back as a line of the readings CSV format (columns
// study_id,time,kind,value,end_time; times in UTC with milliseconds), for
// quarantine and exports.
func FormatRow(r Row) string {
	b := make([]byte, 0, 96)
	b = appendCSVField(b, r.StudyID)
	b = append(b, ',')
	b = time.UnixMilli(r.T).UTC().AppendFormat(b, "2006-01-02T15:04:05.000Z07:00")
	b = append(b, ',')
	b = append(b, r.Kind.String()...)
	b = append(b, ',')
	b = fmt.Appendf(b, "%d", r.V)
	b = append(b, ',')
	if r.Kind == cohort.Steps {
		b = time.UnixMilli(r.End).UTC().AppendFormat(b, "2006-01-02T15:04:05.000Z07:00")
	}
	return string(b)
}

// appendCSVField quotes a field when RFC 4180 requires it.
func appendCSVField(b []byte, s string) []byte {
	needs := false
	for i := 0; i < len(s); i++ {
		if c := s[i]; c == ',' || c == '"' || c == '\n' || c == '\r' {
			needs = true
			break
		}
	}
	if !needs {
		return append(b, s...)
	}
	b = append(b, '"')
	for i := 0; i < len(s); i++ {
		if s[i] == '"' {
			b = append(b, '"')
		}
		b = append(b, s[i])
	}
	return append(b, '"')
}

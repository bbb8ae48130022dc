package wear

import (
	"sort"

	"cohortdesk/cohort"
)

// MergeStats says what Merge found besides the merged series.
type MergeStats struct {
	// Duplicates counts readings dropped because an identical reading (same
	// time, value and end) was already there.
	Duplicates int
	// Conflicts counts readings kept although another reading has the same
	// time with a different value or end.
	Conflicts int
}

// MergeWithStats joins two series of one kind into one, sorted by time, and
// drops exact duplicates (same time, same value, same end), counting them.
// Duplicates inside a or b are dropped too, so importing the same file twice
// changes nothing, and overlapping files merge into one copy of each reading.
//
// Two readings at the same instant with different values are both kept: the
// reader cannot tell which is right (two devices, a correction), and dropping
// one would lose data without trace. They are counted as conflicts so the
// import report can show them. Ties on time are ordered by value, then end,
// so the result does not depend on the order of the arguments.
//
// a and b should be sorted by time, as Samples are; unsorted input is sorted
// (on a copy) first. a and b are not changed. When either has an End column
// the result has one; a reading from a series without End gets End 0.
func MergeWithStats(a, b cohort.Samples) (cohort.Samples, MergeStats) {
	hasEnd := len(a.End) > 0 || len(b.End) > 0
	a, b = ordered(a), ordered(b)
	na, nb := len(a.T), len(b.T)
	out := cohort.Samples{T: make([]int64, 0, na+nb), V: make([]int32, 0, na+nb)}
	if hasEnd {
		out.End = make([]int64, 0, na+nb)
	}
	var st MergeStats
	emit := func(t int64, v int32, e int64) {
		if n := len(out.T); n > 0 && out.T[n-1] == t {
			if out.V[n-1] == v && (!hasEnd || out.End[n-1] == e) {
				st.Duplicates++
				return
			}
			st.Conflicts++
		}
		out.T = append(out.T, t)
		out.V = append(out.V, v)
		if hasEnd {
			out.End = append(out.End, e)
		}
	}
	i, j := 0, 0
	for i < na && j < nb {
		ta, va, ea := a.T[i], a.V[i], endAt(a, i)
		tb, vb, eb := b.T[j], b.V[j], endAt(b, j)
		if less(ta, va, ea, tb, vb, eb) {
			emit(ta, va, ea)
			i++
		} else {
			emit(tb, vb, eb)
			j++
		}
	}
	for ; i < na; i++ {
		emit(a.T[i], a.V[i], endAt(a, i))
	}
	for ; j < nb; j++ {
		emit(b.T[j], b.V[j], endAt(b, j))
	}
	return out, st
}

func endAt(s cohort.Samples, i int) int64 {
	if len(s.End) > i {
		return s.End[i]
	}
	return 0
}

// less is the total order of readings: time, then value, then end.
func less(t1 int64, v1 int32, e1 int64, t2 int64, v2 int32, e2 int64) bool {
	if t1 != t2 {
		return t1 < t2
	}
	if v1 != v2 {
		return v1 < v2
	}
	return e1 < e2
}

// ordered returns s itself when it is already in (time, value, end) order,
// which is the usual case, else a sorted copy.
func ordered(s cohort.Samples) cohort.Samples {
	for i := 1; i < len(s.T); i++ {
		if less(s.T[i], s.V[i], endAt(s, i), s.T[i-1], s.V[i-1], endAt(s, i-1)) {
			c := cohort.Samples{
				T: append([]int64(nil), s.T...),
				V: append([]int32(nil), s.V...),
			}
			if len(s.End) > 0 {
				c.End = append([]int64(nil), s.End...)
			}
			SortSamples(&c)
			return c
		}
	}
	return s
}

// SortSamples puts a series in (time, value, end) order in place: the order
// Merge produces and Grouper flushes.
func SortSamples(s *cohort.Samples) {
	sort.Sort(samplesOrder{s})
}

// samplesOrder sorts the three columns of a series together.
type samplesOrder struct{ s *cohort.Samples }

// Len, Less and Swap implement sort.Interface.
func (o samplesOrder) Len() int { return len(o.s.T) }

// Less orders by time, value, end.
func (o samplesOrder) Less(i, j int) bool {
	return less(o.s.T[i], o.s.V[i], endAt(*o.s, i), o.s.T[j], o.s.V[j], endAt(*o.s, j))
}

// Swap moves all columns at once.
func (o samplesOrder) Swap(i, j int) {
	s := o.s
	s.T[i], s.T[j] = s.T[j], s.T[i]
	s.V[i], s.V[j] = s.V[j], s.V[i]
	if len(s.End) == len(s.T) {
		s.End[i], s.End[j] = s.End[j], s.End[i]
	}
}

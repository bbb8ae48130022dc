package screen

import (
	"cmp"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"math"
	"slices"

	"cohortdesk/cohort"
)

// KindCounts accounts for every reading of one kind that went into Clean:
// In = Kept + Malformed + Future + OutsideWeek + OutOfRange + Duplicate +
// Conflicting. Reordered counts readings that arrived earlier than the reading
// before them; they are sorted into place, not dropped.
type KindCounts struct {
	In          int `json:"in"`
	Kept        int `json:"kept"`
	Reordered   int `json:"reordered"`
	Malformed   int `json:"malformed"`    // column lengths disagree; the surplus has no time or value
	Future      int `json:"future"`       // timestamp after now
	OutsideWeek int `json:"outside_week"` // not inside [Start, End) of the week
	OutOfRange  int `json:"out_of_range"` // implausible value (bpm bounds, RR ms bounds, negative steps, end before start)
	Duplicate   int `json:"duplicate"`    // exact copy of a kept reading
	Conflicting int `json:"conflicting"`  // same time as a different reading; all versions dropped
}

// CleanCounts holds the per-kind accounting of Clean.
type CleanCounts struct {
	HR    KindCounts `json:"hr"`
	Steps KindCounts `json:"steps"`
	RR    KindCounts `json:"rr"`
}

// Dropped is the number of readings Clean removed.
func (k KindCounts) Dropped() int {
	return k.Malformed + k.Future + k.OutsideWeek + k.OutOfRange + k.Duplicate + k.Conflicting
}

// Clean returns a sorted, plausible copy of the week's readings and the count
// of every reading dropped, by reason; w is not modified. Each dropped reading
// is counted once, under the first reason that applies in this order:
// malformed, future (At > now), outside the week, out of range, duplicate,
// conflicting.
//
// Readings sharing a timestamp: exact copies (same value, and same end for
// steps) are duplicates and one is kept; if different readings remain at that
// time, none can be trusted over the others and all are dropped as
// conflicting. The outcome does not depend on input order.
//
// A steps interval is kept when it overlaps the week; the window step counts
// apportion it by overlap, so the part outside the week is ignored. p should
// be valid (Screen validates it first).
func Clean(w *cohort.Week, p Protocol, now int64) (cohort.Week, CleanCounts) {
	out := cohort.Week{Week: w.Week, Start: w.Start, End: w.End}
	var c CleanCounts
	out.HR, c.HR = cleanSeries(&w.HR, cohort.HeartRate, w.Start, w.End, now, p)
	out.Steps, c.Steps = cleanSeries(&w.Steps, cohort.Steps, w.Start, w.End, now, p)
	out.RR, c.RR = cleanSeries(&w.RR, cohort.RRInterval, w.Start, w.End, now, p)
	return out, c
}

func cleanSeries(s *cohort.Samples, kind cohort.Kind, start, end, now int64, p Protocol) (cohort.Samples, KindCounts) {
	var c KindCounts
	interval := kind == cohort.Steps
	n := min(len(s.T), len(s.V))
	longest := max(len(s.T), len(s.V))
	if interval {
		n = min(n, len(s.End))
		longest = max(longest, len(s.End))
	}
	c.In = longest
	c.Malformed = longest - n
	T, V := s.T[:n], s.V[:n]
	var E []int64
	if interval {
		E = s.End[:n]
	}
	for i := 1; i < n; i++ {
		if T[i] < T[i-1] {
			c.Reordered++
		}
	}
	if c.Reordered > 0 {
		T, V, E = sortedCopy(T, V, E)
	}

	// Plausible values. RR bounds follow from the bpm bounds exactly in
	// integers: MinBPM <= 60000/v <= MaxBPM.
	var lo, hi int32
	switch kind {
	case cohort.HeartRate:
		lo, hi = p.MinBPM, p.MaxBPM
	case cohort.RRInterval:
		// max(.., 1) only keeps an invalid protocol from dividing by zero.
		maxBPM, minBPM := max(p.MaxBPM, 1), max(p.MinBPM, 1)
		lo, hi = (60000+maxBPM-1)/maxBPM, 60000/minBPM
	default:
		lo, hi = 0, math.MaxInt32
	}
	// reason classifies one reading: 0 keep, else the counter to bump.
	reason := func(k int) *int {
		t := T[k]
		switch {
		case t > now:
			return &c.Future
		case interval && E[k] > t:
			if E[k] <= start || t >= end {
				return &c.OutsideWeek
			}
		case t < start || t >= end:
			return &c.OutsideWeek
		}
		if V[k] < lo || V[k] > hi || (interval && E[k] < t) {
			return &c.OutOfRange
		}
		return nil
	}

	// Write kept readings by index into full-length columns and cut them at
	// the end: cheaper than three appends per reading.
	oT, oV := make([]int64, n), make([]int32, n)
	var oE []int64
	if interval {
		oE = make([]int64, n)
	}
	m := 0
	keep := func(k int) {
		oT[m], oV[m] = T[k], V[k]
		if interval {
			oE[m] = E[k]
		}
		m++
	}
	var group []int
	for k := 0; k < n; {
		t := T[k]
		e := k + 1
		for e < n && T[e] == t {
			e++
		}
		if e == k+1 { // the usual case: a timestamp of its own
			if r := reason(k); r != nil {
				*r++
			} else {
				keep(k)
			}
			k = e
			continue
		}
		// Several readings share t. Exact copies collapse to their first;
		// distinct survivors conflict and all go.
		group = group[:0]
		for ; k < e; k++ {
			if r := reason(k); r != nil {
				*r++
				continue
			}
			dup := false
			for _, j := range group {
				if V[j] == V[k] && (!interval || E[j] == E[k]) {
					dup = true
					break
				}
			}
			if dup {
				c.Duplicate++
			} else {
				group = append(group, k)
			}
		}
		switch len(group) {
		case 0:
		case 1:
			keep(group[0])
		default:
			c.Conflicting += len(group)
		}
	}
	c.Kept = m
	out := cohort.Samples{T: oT[:m:m], V: oV[:m:m]}
	if interval {
		out.End = oE[:m:m]
	}
	return out, c
}

// sortedCopy returns copies of the columns in time order; readings with
// equal times keep their input order, which Clean's grouping does not depend
// on anyway.
func sortedCopy(T []int64, V []int32, E []int64) ([]int64, []int32, []int64) {
	order := make([]int32, len(T))
	for i := range order {
		order[i] = int32(i)
	}
	slices.SortStableFunc(order, func(a, b int32) int { return cmp.Compare(T[a], T[b]) })
	t2, v2 := make([]int64, len(T)), make([]int32, len(T))
	var e2 []int64
	if E != nil {
		e2 = make([]int64, len(T))
	}
	for k, i := range order {
		t2[k], v2[k] = T[i], V[i]
		if E != nil {
			e2[k] = E[i]
		}
	}
	return t2, v2, e2
}

// digestMagic opens the canonical encoding; the version changes whenever the
// encoding does, so a stored digest is never compared across encodings.
const digestMagic = "cohortdesk screen input v1\n"

// InputDigest is the SHA-256 (lower-case hex) of the canonical encoding of a
// cleaned week, so a stored result can be shown to come from exactly the same
// readings. The encoding, all integers big-endian two's complement:
//
//	"cohortdesk screen input v1\n"
//	week int64, start int64, end int64
//	then for heart rate, steps and RR intervals, in that order:
//	  kind uint8 (1, 2, 3), count uint64,
//	  count records of time int64, value int32, and for steps end int64.
//
// Readings are encoded in the order given, which Clean makes time order.
func InputDigest(w *cohort.Week) string {
	h := sha256.New()
	var buf [32 << 10]byte
	b := append(buf[:0], digestMagic...)
	b = binary.BigEndian.AppendUint64(b, uint64(int64(w.Week)))
	b = binary.BigEndian.AppendUint64(b, uint64(w.Start))
	b = binary.BigEndian.AppendUint64(b, uint64(w.End))
	for _, ks := range [...]struct {
		kind cohort.Kind
		s    *cohort.Samples
	}{{cohort.HeartRate, &w.HR}, {cohort.Steps, &w.Steps}, {cohort.RRInterval, &w.RR}} {
		s := ks.s
		interval := ks.kind == cohort.Steps
		n := min(len(s.T), len(s.V))
		rec := 12
		if interval {
			n = min(n, len(s.End))
			rec = 20
		}
		if len(b)+9 > len(buf) {
			h.Write(b)
			b = buf[:0]
		}
		b = append(b, byte(ks.kind))
		b = binary.BigEndian.AppendUint64(b, uint64(n))
		for i := 0; i < n; {
			// Fill the rest of the buffer with whole records, then hash it.
			m := min(n-i, (len(buf)-len(b))/rec)
			if m == 0 {
				h.Write(b)
				b = buf[:0]
				continue
			}
			off := len(b)
			b = buf[:off+m*rec]
			for k := range m {
				r := b[off+k*rec : off+(k+1)*rec]
				binary.BigEndian.PutUint64(r[0:8], uint64(s.T[i+k]))
				binary.BigEndian.PutUint32(r[8:12], uint32(s.V[i+k]))
				if interval {
					binary.BigEndian.PutUint64(r[12:20], uint64(s.End[i+k]))
				}
			}
			i += m
		}
	}
	h.Write(b)
	return hex.EncodeToString(h.Sum(nil))
}

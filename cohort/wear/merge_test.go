package wear

import (
	"math/rand/v2"
	"sort"
	"testing"

	"cohortdesk/cohort"
)

func hrSeries(pairs ...int64) cohort.Samples {
	var s cohort.Samples
	for i := 0; i < len(pairs); i += 2 {
		s.Append(pairs[i], int32(pairs[i+1]))
	}
	return s
}

func TestMerge(t *testing.T) {
	tests := []struct {
		name      string
		a, b      cohort.Samples
		want      cohort.Samples
		dups      int
		conflicts int
	}{
		{"disjoint", hrSeries(1, 60, 3, 62), hrSeries(2, 61, 4, 63), hrSeries(1, 60, 2, 61, 3, 62, 4, 63), 0, 0},
		{"same file twice", hrSeries(1, 60, 2, 61), hrSeries(1, 60, 2, 61), hrSeries(1, 60, 2, 61), 2, 0},
		{"overlap", hrSeries(1, 60, 2, 61, 3, 62), hrSeries(2, 61, 3, 62, 4, 63), hrSeries(1, 60, 2, 61, 3, 62, 4, 63), 2, 0},
		{"conflict kept in value order", hrSeries(2, 70), hrSeries(2, 61), hrSeries(2, 61, 2, 70), 0, 1},
		{"duplicate inside one input", hrSeries(1, 60, 1, 60, 2, 61), cohort.Samples{}, hrSeries(1, 60, 2, 61), 1, 0},
		{"unsorted input", hrSeries(3, 62, 1, 60), hrSeries(2, 61), hrSeries(1, 60, 2, 61, 3, 62), 0, 0},
		{"both empty", cohort.Samples{}, cohort.Samples{}, cohort.Samples{}, 0, 0},
		{"steps: same start, other end is no duplicate",
			cohort.Samples{T: []int64{0}, V: []int32{100}, End: []int64{60000}},
			cohort.Samples{T: []int64{0, 0}, V: []int32{100, 100}, End: []int64{60000, 120000}},
			cohort.Samples{T: []int64{0, 0}, V: []int32{100, 100}, End: []int64{60000, 120000}}, 1, 1},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, st := MergeWithStats(tt.a, tt.b)
			if !sameSamples(got, tt.want) || st.Duplicates != tt.dups || st.Conflicts != tt.conflicts {
				t.Errorf("got %+v %+v, want %+v dups %d conflicts %d", got, st, tt.want, tt.dups, tt.conflicts)
			}
			got2, st2 := MergeWithStats(tt.b, tt.a)
			if !sameSamples(got2, got) || st2 != st {
				t.Errorf("MergeWithStats(b, a) = %+v, %+v; differs from MergeWithStats(a, b)", got2, st2)
			}
		})
	}
}

func TestMergeLeavesInputs(t *testing.T) {
	a := hrSeries(3, 62, 1, 60)
	b := hrSeries(2, 61)
	MergeWithStats(a, b)
	if a.T[0] != 3 || a.T[1] != 1 {
		t.Errorf("MergeWithStats sorted its argument in place: %+v", a)
	}
}

// reading is one row of a series for the reference merge.
type reading struct {
	t    int64
	v    int32
	e    int64
	keep bool
}

// naiveMerge is the reference: the set union of both inputs, sorted.
func naiveMerge(a, b cohort.Samples, hasEnd bool) (cohort.Samples, int) {
	seen := map[[3]int64]bool{}
	var all []reading
	total := 0
	for _, s := range []cohort.Samples{a, b} {
		for i := range s.T {
			total++
			r := reading{t: s.T[i], v: s.V[i], e: endAt(s, i)}
			k := [3]int64{r.t, int64(r.v), r.e}
			if !seen[k] {
				seen[k] = true
				all = append(all, r)
			}
		}
	}
	sort.Slice(all, func(i, j int) bool { return less(all[i].t, all[i].v, all[i].e, all[j].t, all[j].v, all[j].e) })
	var out cohort.Samples
	for _, r := range all {
		if hasEnd {
			out.AppendInterval(r.t, r.e, r.v)
		} else {
			out.Append(r.t, r.v)
		}
	}
	return out, total - len(all)
}

// TestMergeProperties checks Merge against the reference on random series
// with many repeated instants, and that merging is idempotent.
func TestMergeProperties(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	gen := func(n int, steps bool) cohort.Samples {
		var s cohort.Samples
		tt := int64(0)
		for i := 0; i < n; i++ {
			tt += int64(rng.IntN(3))
			v := int32(60 + rng.IntN(3))
			if steps {
				s.AppendInterval(tt, tt+int64(1+rng.IntN(2)), v)
			} else {
				s.Append(tt, v)
			}
		}
		return s
	}
	for i := 0; i < 500; i++ {
		steps := i%2 == 1
		a, b := gen(rng.IntN(40), steps), gen(rng.IntN(40), steps)
		got, st := MergeWithStats(a, b)
		dups := st.Duplicates
		want, wantDups := naiveMerge(a, b, steps && (a.Len() > 0 || b.Len() > 0))
		if !sameSamples(got, want) || dups != wantDups {
			t.Fatalf("MergeWithStats(%+v, %+v) = %+v, %d; want %+v, %d", a, b, got, dups, want, wantDups)
		}
		again, st2 := MergeWithStats(got, b)
		if dups2 := st2.Duplicates; !sameSamples(again, got) || dups2 != b.Len() {
			t.Fatalf("re-merging b changed the series or missed duplicates: %d of %d", st2.Duplicates, b.Len())
		}
	}
}

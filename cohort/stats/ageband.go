package stats

import (
	"fmt"
	"strconv"
)

// AgeBands splits whole-year ages at cut points: with cuts 50, 60 the bands
// are <50, 50-59 and 60+.
type AgeBands struct {
	cuts []int
}

// NewAgeBands checks that the cuts are positive and strictly increasing.
func NewAgeBands(cuts ...int) (AgeBands, error) {
	if len(cuts) == 0 {
		return AgeBands{}, fmt.Errorf("stats: age bands: no cut points: %w", ErrInvalid)
	}
	for i, c := range cuts {
		if c < 1 {
			return AgeBands{}, fmt.Errorf("stats: age bands: cut %d = %d, want at least 1: %w", i, c, ErrInvalid)
		}
		if i > 0 && c <= cuts[i-1] {
			return AgeBands{}, fmt.Errorf("stats: age bands: cut %d = %d is not above %d: %w", i, c, cuts[i-1], ErrInvalid)
		}
	}
	return AgeBands{cuts: append([]int(nil), cuts...)}, nil
}

// Cuts returns a copy of the cut points.
func (b AgeBands) Cuts() []int { return append([]int(nil), b.cuts...) }

// Index is the band number of an age, 0 for the youngest band.
func (b AgeBands) Index(age int) int {
	i := 0
	for i < len(b.cuts) && age >= b.cuts[i] {
		i++
	}
	return i
}

// Label names the band of an age, for example "60-69".
func (b AgeBands) Label(age int) string { return b.labelOf(b.Index(age)) }

// Labels lists every band in order, so a table shows empty bands too.
func (b AgeBands) Labels() []string {
	out := make([]string, len(b.cuts)+1)
	for i := range out {
		out[i] = b.labelOf(i)
	}
	return out
}

func (b AgeBands) labelOf(i int) string {
	switch {
	case len(b.cuts) == 0:
		return "all ages"
	case i == 0:
		return "<" + strconv.Itoa(b.cuts[0])
	case i == len(b.cuts):
		return strconv.Itoa(b.cuts[i-1]) + "+"
	case b.cuts[i]-1 == b.cuts[i-1]:
		return strconv.Itoa(b.cuts[i-1])
	}
	return strconv.Itoa(b.cuts[i-1]) + "-" + strconv.Itoa(b.cuts[i]-1)
}

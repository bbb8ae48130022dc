package ecg

import (
	"fmt"
	"math"
	"slices"
)

// Annotation is one annotation of a WFDB annotation file.
type Annotation struct {
	Sample int64 // the sample number it marks
	Code   int   // annotation type (1 = normal beat, 5 = premature ventricular beat, ...)
	Sub    int
	Chan   int
	Num    int
	Aux    string
}

// The pseudo-annotation codes of the MIT annotation format (WFDB
// specification, annotation files): they modify the annotation that
// follows (SKIP) or the one before them (NUM, SUB, CHN, AUX).
const (
	annSkip = 59
	annNum  = 60
	annSub  = 61
	annChn  = 62
	annAux  = 63
)

// beatCodes are the annotation codes of QRS complexes, the beats a beat
// detector is compared against: normal, left and right bundle branch block,
// aberrated, premature ventricular, fusion, nodal and atrial premature,
// supraventricular premature, ventricular and nodal escape, paced,
// unclassifiable, bundle branch block, atrial and supraventricular escape,
// fusion of paced and normal, R-on-T (the WFDB library's table of QRS
// annotation codes; from memory).
var beatCodes = map[int]bool{1: true, 2: true, 3: true, 4: true, 5: true, 6: true, 7: true, 8: true, 9: true,
	10: true, 11: true, 12: true, 13: true, 25: true, 34: true, 35: true, 38: true, 41: true}

// IsBeat reports whether an annotation code marks a QRS complex.
func IsBeat(code int) bool { return beatCodes[code] }

// ReadAnnotations decodes a WFDB annotation file in the MIT format: a
// sequence of 16-bit little-endian words whose upper 6 bits are the
// annotation code and lower 10 bits the time since the previous annotation
// in samples. Code 59 (SKIP) carries a longer interval in the next two
// words (a 32-bit two's complement value, high word first); codes 60-63
// set the number, subtype, channel and auxiliary text of the annotation
// before them (AUX: the low 10 bits are the text's length, the text follows
// padded to an even length). A word of zero ends the file.
func ReadAnnotations(name string, b []byte) ([]Annotation, error) {
	fail := func(off int, format string, args ...any) error {
		return &InputError{Format: "wfdb " + name, Offset: int64(off), Field: "annotation", Err: fmt.Errorf(format, args...)}
	}
	var out []Annotation
	var t int64
	var skip int64
	chn, num := 0, 0
	for p := 0; ; {
		if p+2 > len(b) {
			if p == len(b) {
				break // a file without the final zero word
			}
			return out, fail(p, "a lone byte at the end: %w", ErrTruncated)
		}
		w := int(b[p]) | int(b[p+1])<<8
		code, field := w>>10, w&0x3FF
		switch {
		case code == 0 && field == 0:
			return out, nil
		case code == annSkip:
			if p+6 > len(b) {
				return out, fail(p, "SKIP without its interval: %w", ErrTruncated)
			}
			hi := int32(uint32(b[p+2]) | uint32(b[p+3])<<8)
			lo := uint32(b[p+4]) | uint32(b[p+5])<<8
			skip += int64(int32(uint32(hi)<<16 | lo))
			p += 6
			continue
		case code == annNum || code == annSub || code == annChn || code == annAux:
			if len(out) == 0 {
				return out, fail(p, "code %d modifies no annotation", code)
			}
			a := &out[len(out)-1]
			switch code {
			case annNum:
				num = int(int8(field))
				a.Num = num
			case annSub:
				a.Sub = int(int8(field))
			case annChn:
				chn = field & 0xFF
				a.Chan = chn
			case annAux:
				n := field
				if p+2+n > len(b) {
					return out, fail(p, "auxiliary text of %d bytes runs past the end: %w", n, ErrTruncated)
				}
				a.Aux = string(b[p+2 : p+2+n])
				p += (n + 1) &^ 1
			}
			p += 2
			continue
		}
		t += skip + int64(field)
		skip = 0
		if t < 0 || t > math.MaxInt64/2 {
			return out, fail(p, "sample number %d out of range", t)
		}
		out = append(out, Annotation{Sample: t, Code: code, Chan: chn, Num: num})
		p += 2
	}
	return out, nil
}

// BeatSamples lists the sample numbers of the beat annotations, in order.
func BeatSamples(anns []Annotation) []int64 {
	var out []int64
	for _, a := range anns {
		if IsBeat(a.Code) {
			out = append(out, a.Sample)
		}
	}
	slices.Sort(out)
	return out
}

// Match is the comparison of detected beats with reference beats in the
// manner of the ANSI/AAMI EC57 standard for testing beat detectors (from
// memory): a detected beat within the match window of a reference beat
// matches it, one to one. Se = TP/(TP+FN), +P = TP/(TP+FP).
type Match struct {
	TP, FN, FP int
}

// Se is the sensitivity in percent; NaN without reference beats.
func (m Match) Se() float64 { return pct(m.TP, m.TP+m.FN) }

// PPV is the positive predictivity (+P) in percent; NaN without detections.
func (m Match) PPV() float64 { return pct(m.TP, m.TP+m.FP) }

// Add sums two comparisons (the gross statistics of EC57).
func (m Match) Add(o Match) Match { return Match{m.TP + o.TP, m.FN + o.FN, m.FP + o.FP} }

func pct(a, b int) float64 {
	if b == 0 {
		return math.NaN()
	}
	return 100 * float64(a) / float64(b)
}

// MatchBeats pairs reference and detected beat times (seconds, any order)
// one to one, closest pairs first, when they are at most window apart.
func MatchBeats(ref, det []float64, window float64) Match {
	r := slices.Clone(ref)
	d := slices.Clone(det)
	slices.Sort(r)
	slices.Sort(d)
	type pair struct {
		i, j int
		dt   float64
	}
	var pairs []pair
	j0 := 0
	for i, t := range r {
		for j0 < len(d) && d[j0] < t-window {
			j0++
		}
		for j := j0; j < len(d) && d[j] <= t+window; j++ {
			pairs = append(pairs, pair{i, j, math.Abs(d[j] - t)})
		}
	}
	slices.SortStableFunc(pairs, func(a, b pair) int {
		switch {
		case a.dt < b.dt:
			return -1
		case a.dt > b.dt:
			return 1
		}
		return 0
	})
	usedR := make([]bool, len(r))
	usedD := make([]bool, len(d))
	var m Match
	for _, p := range pairs {
		if usedR[p.i] || usedD[p.j] {
			continue
		}
		usedR[p.i], usedD[p.j] = true, true
		m.TP++
	}
	m.FN = len(r) - m.TP
	m.FP = len(d) - m.TP
	return m
}

package demo

import "math/rand/v2"

// Random streams. Every draw in the package comes from a generator keyed by the
// study seed, a stream tag and the thing being drawn (participant, week, day,
// case), so any part can be generated alone and in any order with the same
// result: a week does not depend on whether the week before it was generated.
const (
	streamStudy uint64 = iota + 1
	streamPerson
	streamWeek
	streamDay
	streamCase
	streamPlan
)

// mix is the splitmix64 finaliser: a cheap bijection with good avalanche, used
// to turn structured keys (seed, stream, index) into unrelated-looking seeds.
func mix(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}

// key folds a seed, a stream and two indices into one 64-bit key.
func key(seed, stream, a, b uint64) uint64 {
	h := mix(seed)
	h = mix(h ^ stream)
	h = mix(h ^ a)
	return mix(h ^ b)
}

// newRand returns a PCG generator for one keyed stream.
func newRand(seed, stream, a, b uint64) *rand.Rand {
	k := key(seed, stream, a, b)
	return rand.New(rand.NewPCG(k, mix(k^0x5851f42d4c957f2d)))
}

// unit maps a 64-bit value to [0, 1) using its top 53 bits.
func unit(h uint64) float64 { return float64(h>>11) / (1 << 53) }

// hashString folds a string into a key (FNV-1a), for keying cases by study ID.
func hashString(s string) uint64 {
	h := uint64(14695981039346656037)
	for i := 0; i < len(s); i++ {
		h ^= uint64(s[i])
		h *= 1099511628211
	}
	return h
}

// pick returns an index drawn with the given weights (need not sum to 1).
func pick(r *rand.Rand, weights []float64) int {
	total := 0.0
	for _, w := range weights {
		total += w
	}
	x := r.Float64() * total
	for i, w := range weights {
		if x < w {
			return i
		}
		x -= w
	}
	return len(weights) - 1
}

// between draws a float uniformly from [lo, hi).
func between(r *rand.Rand, lo, hi float64) float64 { return lo + (hi-lo)*r.Float64() }

// betweenInt draws an int uniformly from [lo, hi].
func betweenInt(r *rand.Rand, lo, hi int) int { return lo + r.IntN(hi-lo+1) }

package wear

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"math/bits"

	"cohortdesk/cohort"
)

// Series layout, version 1. Readings of one participant, week and kind are
// stored as one value, column after column, because each column on its own
// is a run of small, similar numbers (a generic compressor in the storage
// layer then finds more to squeeze too):
//
//	byte     version (1)
//	byte     kind (cohort.Kind)
//	byte     flags: 1 = time steps in seconds, 2 = time column holds
//	         differences of differences, 4 = end column present (steps)
//	uvarint  n, the number of readings
//	varint   T[0] in ms                                      (if n > 0)
//	n-1 ×    varint time step, T[i]-T[i-1] in the time unit,
//	         or that step minus the previous step (flag 2)
//	varint   V[0], then n-1 × varint V[i]-V[i-1]
//	n ×      varint (End[i]-T[i]) minus (End[i-1]-T[i-1]), in the time
//	         unit, the first against 0                       (flag 4)
//
// Every varint is a zigzag signed varint as encoding/binary writes it, so
// unsorted input still round-trips. Differences wrap in 64 bits, which keeps
// the round trip exact for any input. The encoder picks seconds when every
// step and duration is a whole number of seconds, and differences of
// differences when that makes the time column shorter (regular sampling).
const (
	codecVersion = 1
	flagSeconds  = 1
	flagDoD      = 2
	flagEnd      = 4
	headerLen    = 3
)

// ErrCorrupt is wrapped by every Decode error: the bytes are not a series
// this package wrote.
var ErrCorrupt = errors.New("corrupt series") // match with errors.Is

// Encode packs one participant-week series of one kind. For Steps the End
// column is stored; for other kinds End is ignored. It panics when s's
// columns differ in length (T and V, and End for steps), as an out-of-range
// index would: that is a bug in the caller, not bad data.
func Encode(s cohort.Samples, kind cohort.Kind) []byte {
	return AppendEncode(make([]byte, 0, EncodedSizeHint(s.Len(), kind)), s, kind)
}

// EncodedSizeHint is a capacity that usually fits the encoding of n readings,
// for callers that reuse buffers.
func EncodedSizeHint(n int, kind cohort.Kind) int {
	per := 4
	if kind == cohort.Steps {
		per = 6
	}
	return 16 + n*per
}

// AppendEncode is Encode appending to dst, so a loader can reuse one buffer.
func AppendEncode(dst []byte, s cohort.Samples, kind cohort.Kind) []byte {
	n := len(s.T)
	hasEnd := kind == cohort.Steps
	if len(s.V) != n || (hasEnd && len(s.End) != n) {
		panic(fmt.Sprintf("wear: Encode: %d times, %d values, %d ends for %s", n, len(s.V), len(s.End), kind))
	}
	seconds := true
	for i := 1; i < n && seconds; i++ {
		seconds = (s.T[i]-s.T[i-1])%1000 == 0
	}
	if hasEnd {
		for i := 0; i < n && seconds; i++ {
			seconds = (s.End[i]-s.T[i])%1000 == 0
		}
	}
	unit := int64(1)
	flags := byte(0)
	if seconds {
		unit = 1000
		flags |= flagSeconds
	}
	var sizeStep, sizeDoD int
	var prev int64
	for i := 1; i < n; i++ {
		d := (s.T[i] - s.T[i-1]) / unit
		sizeStep += varintLen(d)
		sizeDoD += varintLen(d - prev)
		prev = d
	}
	dod := sizeDoD < sizeStep
	if dod {
		flags |= flagDoD
	}
	if hasEnd {
		flags |= flagEnd
	}
	dst = append(dst, codecVersion, byte(kind), flags)
	dst = binary.AppendUvarint(dst, uint64(n))
	if n == 0 {
		return dst
	}
	dst = binary.AppendVarint(dst, s.T[0])
	prev = 0
	for i := 1; i < n; i++ {
		d := (s.T[i] - s.T[i-1]) / unit
		if dod {
			dst = binary.AppendVarint(dst, d-prev)
			prev = d
		} else {
			dst = binary.AppendVarint(dst, d)
		}
	}
	dst = binary.AppendVarint(dst, int64(s.V[0]))
	for i := 1; i < n; i++ {
		dst = binary.AppendVarint(dst, int64(s.V[i])-int64(s.V[i-1]))
	}
	if hasEnd {
		var prevDur int64
		for i := 0; i < n; i++ {
			dur := (s.End[i] - s.T[i]) / unit
			dst = binary.AppendVarint(dst, dur-prevDur)
			prevDur = dur
		}
	}
	return dst
}

// varintLen is the length of x as a zigzag varint.
func varintLen(x int64) int {
	u := uint64(x<<1) ^ uint64(x>>63)
	return (bits.Len64(u|1) + 6) / 7
}

func header(b []byte) (kind cohort.Kind, flags byte, n int, rest []byte, err error) {
	if len(b) < headerLen+1 {
		return 0, 0, 0, nil, fmt.Errorf("wear: decode: %w: %d bytes is shorter than a header", ErrCorrupt, len(b))
	}
	if b[0] != codecVersion {
		return 0, 0, 0, nil, fmt.Errorf("wear: decode: %w: version %d, want %d", ErrCorrupt, b[0], codecVersion)
	}
	kind, flags = cohort.Kind(b[1]), b[2]
	if kind < cohort.HeartRate || kind > cohort.RRInterval {
		return 0, 0, 0, nil, fmt.Errorf("wear: decode: %w: kind %d", ErrCorrupt, b[1])
	}
	if flags&^(flagSeconds|flagDoD|flagEnd) != 0 || (flags&flagEnd != 0) != (kind == cohort.Steps) {
		return 0, 0, 0, nil, fmt.Errorf("wear: decode: %w: flags %#x for %s", ErrCorrupt, flags, kind)
	}
	u, k := binary.Uvarint(b[headerLen:])
	if k <= 0 {
		return 0, 0, 0, nil, fmt.Errorf("wear: decode: %w: bad reading count", ErrCorrupt)
	}
	rest = b[headerLen+k:]
	// Each reading takes at least one byte per column, so a count larger
	// than that is corrupt; checking first keeps a bad count from causing a
	// huge allocation.
	per := uint64(2)
	if flags&flagEnd != 0 {
		per = 3
	}
	if u > uint64(len(rest))/per {
		return 0, 0, 0, nil, fmt.Errorf("wear: decode: %w: %d readings cannot fit in %d bytes", ErrCorrupt, u, len(rest))
	}
	return kind, flags, int(u), rest, nil
}

// Decode unpacks a series written by Encode. It never panics on bad input,
// and never allocates more than a small multiple of len(b).
func Decode(b []byte) (cohort.Samples, error) {
	var s cohort.Samples
	err := DecodeInto(&s, b)
	return s, err
}

// DecodeInto is Decode reusing s's slices, for loops over many series. On
// error s holds no readings.
func DecodeInto(s *cohort.Samples, b []byte) error {
	_, flags, n, rest, err := header(b)
	if err != nil {
		return err
	}
	err = decodeColumns(s, flags, n, rest)
	if err != nil {
		s.T, s.V = s.T[:0], s.V[:0]
		if s.End != nil {
			s.End = s.End[:0]
		}
	}
	return err
}

func decodeColumns(s *cohort.Samples, flags byte, n int, b []byte) error {
	s.T = grow64(s.T, n)
	s.V = grow32(s.V, n)
	if flags&flagEnd != 0 {
		s.End = grow64(s.End, n)
	} else {
		s.End = nil
	}
	if n == 0 {
		return checkEnd(b)
	}
	unit := int64(1)
	if flags&flagSeconds != 0 {
		unit = 1000
	}
	next := func(what string) (int64, error) {
		x, k := binary.Varint(b)
		if k <= 0 {
			return 0, fmt.Errorf("wear: decode: %w: %s column truncated", ErrCorrupt, what)
		}
		b = b[k:]
		return x, nil
	}
	t, err := next("time")
	if err != nil {
		return err
	}
	s.T[0] = t
	var step int64
	for i := 1; i < n; i++ {
		x, err := next("time")
		if err != nil {
			return err
		}
		if flags&flagDoD != 0 {
			step += x
		} else {
			step = x
		}
		t += step * unit
		s.T[i] = t
	}
	var v int64
	for i := 0; i < n; i++ {
		x, err := next("value")
		if err != nil {
			return err
		}
		v += x
		if v < math.MinInt32 || v > math.MaxInt32 {
			return fmt.Errorf("wear: decode: %w: value %d at reading %d is outside 32 bits", ErrCorrupt, v, i)
		}
		s.V[i] = int32(v)
	}
	if flags&flagEnd != 0 {
		var dur int64
		for i := 0; i < n; i++ {
			x, err := next("end")
			if err != nil {
				return err
			}
			dur += x
			s.End[i] = s.T[i] + dur*unit
		}
	}
	return checkEnd(b)
}

func checkEnd(b []byte) error {
	if len(b) != 0 {
		return fmt.Errorf("wear: decode: %w: %d bytes after the last column", ErrCorrupt, len(b))
	}
	return nil
}

func grow64(s []int64, n int) []int64 {
	if cap(s) < n {
		return make([]int64, n)
	}
	return s[:n]
}

func grow32(s []int32, n int) []int32 {
	if cap(s) < n {
		return make([]int32, n)
	}
	return s[:n]
}

package db

import (
	"encoding/binary"
	"fmt"
	"math"
)

// EncodeSamples packs an ECG waveform (mV) for recordings.samples: little-endian
// int16 microvolts, clipped to +-32.767 mV. A handheld recorder's resolution is
// a few microvolts, so nothing a reader can see is lost, and a 60 s recording
// at 500 Hz takes 60 kB.
func EncodeSamples(mv []float64) []byte {
	b := make([]byte, 2*len(mv))
	for i, v := range mv {
		uv := math.Round(v * 1000)
		if uv > math.MaxInt16 {
			uv = math.MaxInt16
		} else if uv < math.MinInt16 {
			uv = math.MinInt16
		}
		binary.LittleEndian.PutUint16(b[2*i:], uint16(int16(uv)))
	}
	return b
}

// DecodeSamples unpacks recordings.samples into millivolts.
func DecodeSamples(b []byte) ([]float64, error) {
	if len(b)%2 != 0 {
		return nil, fmt.Errorf("db: recording samples: odd length %d", len(b))
	}
	out := make([]float64, len(b)/2)
	for i := range out {
		out[i] = float64(int16(binary.LittleEndian.Uint16(b[2*i:]))) / 1000
	}
	return out, nil
}

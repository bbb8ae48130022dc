package db

import (
	"cohortdesk/cohort/ecg"
	"encoding/binary"
	"fmt"
)

// EncodeSamples packs an ECG waveform (mV) for recordings.samples: little-endian
// int16 microvolts at the resolution of ecg.Microvolts, so a 60 s recording at
// 500 Hz takes 60 kB.
func EncodeSamples(mv []float64) []byte {
	b := make([]byte, 2*len(mv))
	for i, v := range mv {
		binary.LittleEndian.PutUint16(b[2*i:], uint16(ecg.Microvolts(v)))
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

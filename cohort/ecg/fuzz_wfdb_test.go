package ecg_test

import (
	"errors"
	"math"
	"testing"

	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
)

func FuzzReadWFDB(f *testing.F) {
	syn, err := ecg.Synthesize(ecgtest.SinusRR(4, 800, 1), ecg.SynthOptions{RateHz: 250})
	if err != nil {
		f.Fatal(err)
	}
	for _, format := range []int{16, 212} {
		files, err := ecgtest.EncodeWFDB("r", 250, format, []ecgtest.WFDBChannel{{Description: "ECG", Values: syn.Waveform.Samples}})
		if err != nil {
			f.Fatal(err)
		}
		f.Add(files.Header, files.Signal)
	}
	f.Add([]byte("r 2 360 4\nr.dat 212 200 11 1024 0 0 0 MLII\nr.dat 212 200 11 1024 0 0 0 V5\n"), []byte{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12})
	f.Fuzz(func(t *testing.T, header, signal []byte) {
		rec, err := ecg.ReadWFDB(ecg.File{Name: "r.hea", Data: header}, []ecg.File{{Name: "r.dat", Data: signal}}, nil)
		if err != nil {
			if !errors.Is(err, ecg.ErrFormat) {
				t.Fatalf("error %v does not match ErrFormat", err)
			}
			return
		}
		c := rec.Contents
		if len(c.Leads) == 0 || c.Chosen < 0 || c.Chosen >= len(c.Leads) {
			t.Fatalf("%d leads, chosen %d", len(c.Leads), c.Chosen)
		}
		for _, l := range c.Leads {
			for _, v := range l.Waveform.Samples {
				if math.IsInf(v, 0) {
					t.Fatalf("sample %v", v)
				}
			}
		}
	})
}

func FuzzReadAnnotations(f *testing.F) {
	f.Add(ecgtest.EncodeAnnotations([]ecgtest.BeatAnnotation{{Sample: 100, Code: 1}, {Sample: 5000, Code: 5, Aux: "(B"}}))
	f.Add([]byte{0x00, 0xEC, 0xFF, 0xFF, 0xFF, 0xFF, 0x00, 0x04})
	f.Fuzz(func(t *testing.T, b []byte) {
		anns, err := ecg.ReadAnnotations("f.atr", b)
		if err != nil {
			if !errors.Is(err, ecg.ErrFormat) {
				t.Fatalf("error %v does not match ErrFormat", err)
			}
			return
		}
		for i := 1; i < len(anns); i++ {
			if anns[i].Sample < 0 {
				t.Fatalf("annotation %d at sample %d", i, anns[i].Sample)
			}
		}
	})
}

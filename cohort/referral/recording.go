package referral

import (
	"math"
	"slices"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/ecg"
)

// MaxStripSeconds is the most of a recording the summary's strip shows: the
// 30 s a diagnosis of AF needs (2020 ESC AF guidelines; verified, secondary).
const MaxStripSeconds = 30

// recordingView shows at most MaxStripSeconds of the recording at the stored
// resolution, with the recorder's own interpretation in overread's words.
func recordingView(r Recording, enrolled cohort.Date, loc *time.Location) *RecordingView {
	v := &RecordingView{StudyDay: deid.StudyTimeAt(enrolled, loc, r.TakenAt).Day, DurationS: round(r.DurationS, 1),
		AutoInterpretation: r.Auto.Label(), RateHz: r.RateHz}
	if !(r.RateHz > 0) || len(r.Samples) == 0 {
		return v
	}
	n := min(len(r.Samples), int(math.Round(MaxStripSeconds*r.RateHz)))
	v.ShownSeconds = round(float64(n)/r.RateHz, 2)
	v.MicroVolts = make([]int16, n)
	for i, mv := range r.Samples[:n] {
		v.MicroVolts[i] = ecg.Microvolts(mv)
	}
	for _, b := range r.Beats {
		if b >= 0 && b < n {
			v.Beats = append(v.Beats, b)
		}
	}
	slices.Sort(v.Beats)
	return v
}

// Waveform is the shown part of the recording in millivolts, for drawing.
func (r RecordingView) Waveform() ecg.Waveform {
	mv := make([]float64, len(r.MicroVolts))
	for i, v := range r.MicroVolts {
		mv[i] = float64(v) / 1000
	}
	return ecg.Waveform{Samples: mv, RateHz: r.RateHz}
}

// Strip lays the shown recording out on ECG paper with StripOptions.
func (r RecordingView) Strip() ecg.StripLayout {
	return ecg.Layout(r.Waveform(), r.Beats, StripOptions())
}

// StripOptions lay the strip out at true scale (25 mm/s, 10 mm/mV) in rows
// of 6 s, so a row of 150 mm plus its calibration margin fits the printable
// width of both A4 and US Letter.
func StripOptions() ecg.StripOptions {
	o := ecg.DefaultStripOptions()
	o.RowSeconds = 6
	o.RowHeightMM = 25
	return o
}

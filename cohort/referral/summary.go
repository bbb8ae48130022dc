package referral

import (
	"fmt"

	"cohortdesk/cohort/overread"
)

// Summary is the de-identified content of a referral summary. Its JSON is
// what is recorded when a summary is issued; its top-level fields are the
// allow-list deid.ReferralSummary.
type Summary struct {
	FormatVersion  int            `json:"format_version"`
	ReferralCode   string         `json:"referral_code"`
	IssuedStudyDay int            `json:"issued_study_day"`
	Protocol       string         `json:"protocol"`
	AgeBand        string         `json:"age_band"`
	Sex            string         `json:"sex"`
	FlaggedWeeks   []WeekView     `json:"flagged_weeks"`
	HeartRate      *HeartRateView `json:"heart_rate"`
	Recording      *RecordingView `json:"recording"`
	OverRead       *OverReadView  `json:"over_read"`
	Risk           RiskView       `json:"risk"`
	ContactRoute   string         `json:"contact_route"`
	Cautions       []string       `json:"cautions"`
	// Draft marks a summary issued and waiting for an investigator's
	// sign-off: it is printed as a draft and may not be sent. SignOff is
	// set once an investigator signed it off (Sign). Summaries issued before
	// drafts existed carry neither, so their content, digest and PDF are
	// what they were.
	Draft   bool         `json:"draft,omitempty"`
	SignOff *SignOffView `json:"sign_off,omitempty"`
}

// SignOffView is who signed a summary off and on which study day. The signer
// is a member of the study staff, named because the physician needs to know
// who vouches for the summary; the day is a study day like every other date
// of the summary.
type SignOffView struct {
	By       string `json:"by"`
	StudyDay int    `json:"study_day"`
}

// WeekView is a flagged week as the summary shows it.
type WeekView struct {
	StudyWeek     int      `json:"study_week"`
	FirstDay      int      `json:"first_study_day"`
	LastDay       int      `json:"last_study_day"`
	Verdict       string   `json:"verdict"`
	Reason        string   `json:"reason"`
	WearHours     float64  `json:"wear_hours"`
	Metrics       []Metric `json:"metrics"`
	MostIrregular bool     `json:"most_irregular"`
}

// Metric is one labelled figure of a week.
type Metric struct {
	Label string `json:"label"`
	Value string `json:"value"`
}

// HeartRateView is the heart rate of the most irregular week in bins, with
// time as minutes from the start of the study week: no clock times or dates.
type HeartRateView struct {
	StudyWeek     int     `json:"study_week"`
	FirstStudyDay int     `json:"first_study_day"`
	Minutes       int     `json:"minutes"` // length of the week
	BinMinutes    int     `json:"bin_minutes"`
	Bins          []HRBin `json:"bins"`
	Readings      int     `json:"readings"`
	// WindowMinutes is the window size whose irregular windows Irregular
	// marks (the size with the largest irregular share that week); 0 when
	// none is marked.
	WindowMinutes int    `json:"window_minutes"`
	Irregular     []Span `json:"irregular"`
}

// HRBin is the lowest and highest heart rate within one bin, in bpm.
type HRBin struct {
	Minute int `json:"minute"` // start of the bin
	Min    int `json:"min"`
	Max    int `json:"max"`
}

// Span is a stretch of the week in minutes, [From, To).
type Span struct {
	From int `json:"from"`
	To   int `json:"to"`
}

// RecordingView is the ECG strip shown: at most MaxStripSeconds of the
// recording, in microvolts.
type RecordingView struct {
	StudyDay           int     `json:"study_day"`
	DurationS          float64 `json:"duration_s"`
	AutoInterpretation string  `json:"auto_interpretation"`
	RateHz             float64 `json:"rate_hz"`
	ShownSeconds       float64 `json:"shown_seconds"`
	MicroVolts         []int16 `json:"microvolts"`
	Beats              []int   `json:"beats"`
}

// OverReadView is the over-read verdict with its date as a study day.
type OverReadView struct {
	Rhythm      overread.Rhythm `json:"rhythm"` // stored value, e.g. af
	RhythmLabel string          `json:"rhythm_label"`
	Reader      string          `json:"reader"`
	Confidence  string          `json:"confidence"`
	StudyDay    int             `json:"study_day"`
}

// RiskView is the stroke-risk part, for physician review.
type RiskView struct {
	Note    string      `json:"note"`
	Factors []Factor    `json:"factors"`
	Scores  []ScoreView `json:"scores"`
}

// Factor is one intake answer.
type Factor struct {
	Label  string `json:"label"`
	Answer string `json:"answer"`
}

// ScoreView is one score with its items and source.
type ScoreView struct {
	Name       string     `json:"name"`
	Source     string     `json:"source"`
	Points     int        `json:"points"`
	UpperBound int        `json:"upper_bound"`
	Max        int        `json:"max"`
	Complete   bool       `json:"complete"`
	Items      []ItemView `json:"items"`
	Unknown    []string   `json:"unknown"`
	// StrokeRate is the adjusted annual stroke rate of the score in its
	// derivation cohort, for CHA2DS2-VASc when complete; else "".
	StrokeRate string `json:"stroke_rate"`
}

// ItemView is one item that added points.
type ItemView struct {
	Code   string `json:"code"`
	Label  string `json:"label"`
	Points int    `json:"points"`
}

// ScoreText words a score's total: "3 of 9" or, with unknown items,
// "at least 2 (up to 4) of 9".
func (s ScoreView) ScoreText() string {
	if s.Complete {
		return fmt.Sprintf("%d of %d", s.Points, s.Max)
	}
	return fmt.Sprintf("at least %d (up to %d) of %d", s.Points, s.UpperBound, s.Max)
}

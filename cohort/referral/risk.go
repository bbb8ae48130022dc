package referral

import (
	"fmt"

	"cohortdesk/cohort/risk"
)

// Sources of the scores, printed beside them.
const (
	SourceVASc = "Lip GYH, Nieuwlaat R, Pisters R, Lane DA, Crijns HJGM. Chest 2010;137:263-72"
	SourceVA   = "2024 ESC guidelines for the management of atrial fibrillation"
	// RiskNote is printed above the scores.
	RiskNote = "For physician review. Computed from the participant's own answers to the study's intake survey, not checked against medical records. The study does not treat; whether to start anticoagulation is the physician's decision."
)

func riskView(in risk.Intake, band, sex string) RiskView {
	v := RiskView{Note: RiskNote}
	v.Factors = []Factor{
		{"Age band", band},
		{"Sex", sex},
		{"Congestive heart failure", in.HeartFailure.String()},
		{"Hypertension", in.Hypertension.String()},
		{"Diabetes", in.Diabetes.String()},
		{"Prior stroke, TIA or thromboembolism", in.StrokeTIA.String()},
		{"Vascular disease (prior MI, peripheral artery disease, aortic plaque)", in.Vascular.String()},
	}
	for _, sc := range []struct {
		s      risk.Score
		source string
	}{{risk.CHA2DS2VASc(in), SourceVASc}, {risk.CHA2DS2VA(in), SourceVA}} {
		sv := ScoreView{Name: sc.s.Name, Source: sc.source, Points: sc.s.Points, UpperBound: sc.s.UpperBound, Max: sc.s.Max, Complete: sc.s.Complete}
		for _, it := range sc.s.Contributed {
			sv.Items = append(sv.Items, ItemView{Code: it.Code, Label: it.Label, Points: it.Points})
		}
		for _, it := range sc.s.Unknown {
			sv.Unknown = append(sv.Unknown, it.Label)
		}
		if sc.s.Name == "CHA2DS2-VASc" && sc.s.Complete {
			if rate, ok := risk.AnnualStrokeRate(sc.s.Points); ok {
				sv.StrokeRate = fmt.Sprintf("%.1f%% a year adjusted stroke rate at this score in the cohort the score was derived from; it describes that historical cohort, not this person", rate)
			}
		}
		v.Scores = append(v.Scores, sv)
	}
	return v
}

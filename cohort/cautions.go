package cohort

import "strings"

// Cautions are the screening cautions, in our own words, defined once here.
// They go wherever a flag, a hint, a verdict or a figure derived from them is
// shown: on every such page (views/components.Cautions), printed with it, in
// every export and bundle (CautionsText, as a text file) and once in the
// output of `cohortdesk screen`. Where they come from: that screening is not
// diagnosis and defers to clinicians is common practice in screening
// studies; the 30 s rule for diagnosing AF is the 2020 ESC AF guidelines'
// (from memory).
var Cautions = []string{
	"Screening is not diagnosis: a flag from watch data only means that a clinician should read an ECG.",
	NegativeWeekCaution,
	"Not for emergencies: this tool does not detect heart attacks or other emergencies. Anyone with chest pain, fainting or severe shortness of breath must call emergency services.",
	"Atrial fibrillation is diagnosed on an ECG that shows it for at least 30 seconds (2020 ESC AF guidelines); a shorter recording does not settle it either way.",
	"The thresholds shipped as defaults are illustrative: they have not been clinically validated.",
	"Diagnosis and treatment are for licensed clinicians to decide, following local practice.",
}

// NegativeWeekCaution goes next to every negative screening result.
const NegativeWeekCaution = "A negative week does not rule out atrial fibrillation."

// CautionsHeading is the title of the cautions wherever they are shown.
const CautionsHeading = "Screening cautions"

// CautionsText is the cautions as a plain-text file (UTF-8, one caution a
// line after a heading), as exports and bundles carry them.
func CautionsText() string {
	var b strings.Builder
	b.WriteString(CautionsHeading + "\n\n")
	for _, c := range Cautions {
		b.WriteString("- " + c + "\n")
	}
	return b.String()
}

// CautionsFile is the name of the cautions' text file inside an export or
// bundle.
const CautionsFile = "CAUTIONS.txt"

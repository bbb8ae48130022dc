package wear

import (
	"io"
	"math"
	"strconv"

	"cohortdesk/cohort/screen"
)

// VerdictRow is one accepted line of an external verdicts file: another
// algorithm's call on one participant-week, in the screen's own words
// (screen.Verdict: positive, negative or insufficient).
type VerdictRow struct {
	StudyID      string
	Week         int     // study week, 0-based
	Score        float64 // the model's score; meaningful only when HasScore
	HasScore     bool    // false when the score column was empty
	Verdict      screen.Verdict
	ModelName    string
	ModelVersion string
	Line         int
}

var verdictColumns = []column{
	{"study_id", true},
	{"study_week", true},
	{"score", true},
	{"verdict", true},
	{"model_name", true},
	{"model_version", true},
}

// VerdictReader streams an external verdicts CSV: a header naming the
// columns study_id, study_week, score, verdict, model_name and model_version
// in any order (no others), then one line per participant-week. The CSV rules
// are those of the readings format. study_week is a whole number from 0;
// score is a decimal number (exponent allowed, since models print floats) or
// empty when the model gave none; verdict is positive, negative or
// insufficient in any letter case; model name and version are required text.
// Bad lines are refused one by one with a Reason, as for readings.
type VerdictReader struct {
	csvLines
	row    VerdictRow
	models interner
}

// NewVerdictReader reads verdicts from r; name is used in messages.
func NewVerdictReader(r io.Reader, name string) *VerdictReader {
	return &VerdictReader{csvLines: newCSVLines(r, name, verdictColumns)}
}

// Next moves to the next verdict or rejection; false at the end or after a
// file-level error (see Err).
func (v *VerdictReader) Next() bool {
	if !v.step() {
		return false
	}
	if v.rej == nil {
		v.parse()
	}
	return true
}

// Verdict is the current row; meaningful only when Rejection is nil.
func (v *VerdictReader) Verdict() VerdictRow { return v.row }

func (v *VerdictReader) parse() {
	f := v.rr.fields
	if len(f) != v.ncols {
		v.reject(ReasonFieldCount, "", "record has %d fields, header has %d", len(f), v.ncols)
		return
	}
	get := func(c int) []byte { return trimSpace(f[v.idx[c]]) }
	for c, col := range verdictColumns {
		if col.name != "score" && len(get(c)) == 0 {
			v.reject(ReasonMissingField, col.name, "%s is empty", col.name)
			return
		}
	}
	row := VerdictRow{Line: v.rr.start}
	wb := get(1)
	d, ok := parseDecimal(wb)
	if !ok || d.neg || d.fraction || d.intPart > math.MaxInt32 {
		v.reject(ReasonBadWeek, "study_week", "study_week %s is not a whole number from 0", quote(wb))
		return
	}
	row.Week = int(d.intPart)
	if sb := get(2); len(sb) > 0 {
		s, err := strconv.ParseFloat(string(sb), 64)
		if err != nil || math.IsNaN(s) || math.IsInf(s, 0) {
			v.reject(ReasonBadNumber, "score", "score %s is not a finite number", quote(sb))
			return
		}
		row.Score, row.HasScore = s, true
	}
	vb := get(3)
	verdict, err := screen.ParseVerdict(string(vb))
	if err != nil {
		v.reject(ReasonBadVerdict, "verdict", "verdict %s is not positive, negative or insufficient", quote(vb))
		return
	}
	row.Verdict = verdict
	row.StudyID = v.ids.get(get(0))
	row.ModelName = v.models.get(get(4))
	row.ModelVersion = string(get(5))
	v.row = row
}

package wear

import (
	"bytes"
	"cohortdesk/cohort/screen"
	"errors"
	"strings"
	"testing"
)

func readVerdicts(tb testing.TB, in string) ([]VerdictRow, []*Rejection, error) {
	tb.Helper()
	vr := NewVerdictReader(strings.NewReader(in), "verdicts.csv")
	var rows []VerdictRow
	var rejs []*Rejection
	for vr.Next() {
		if rej := vr.Rejection(); rej != nil {
			rejs = append(rejs, rej)
			continue
		}
		rows = append(rows, vr.Verdict())
	}
	return rows, rejs, vr.Err()
}

func TestVerdictReader(t *testing.T) {
	in := "model_name,model_version,study_id,study_week,verdict,score\n" +
		"rhythm-net,2.1.0,S-0001,0,positive,0.91\n" + // line 2
		"rhythm-net,2.1.0,S-0001,1,NEGATIVE,1.5e-3\n" + // line 3
		"rhythm-net,2.1.0,S-0002,0,insufficient,\n" + // line 4
		"rhythm-net,2.1.0,S-0002,1,maybe,0.5\n" + // line 5: bad_verdict
		"rhythm-net,2.1.0,S-0002,-1,negative,0.1\n" + // line 6: bad_week
		"rhythm-net,2.1.0,S-0002,2.5,negative,0.1\n" + // line 7: bad_week
		"rhythm-net,2.1.0,S-0002,3,negative,high\n" + // line 8: bad_number
		"rhythm-net,2.1.0,S-0002,3,negative,NaN\n" + // line 9: bad_number
		"rhythm-net,,S-0002,3,negative,0.1\n" + // line 10: missing_field
		"rhythm-net,2.1.0,S-0002,3,negative\n" + // line 11: field_count
		"\"rhythm-net\",\"2.1.0\",\"S-0003\",\"4\",\"positive\",\"0.7\"\n" // line 12
	rows, rejs, err := readVerdicts(t, in)
	if err != nil {
		t.Fatal(err)
	}
	want := []VerdictRow{
		{"S-0001", 0, 0.91, true, screen.Positive, "rhythm-net", "2.1.0", 2},
		{"S-0001", 1, 1.5e-3, true, screen.Negative, "rhythm-net", "2.1.0", 3},
		{"S-0002", 0, 0, false, screen.Insufficient, "rhythm-net", "2.1.0", 4},
		{"S-0003", 4, 0.7, true, screen.Positive, "rhythm-net", "2.1.0", 12},
	}
	if len(rows) != len(want) {
		t.Fatalf("rows %+v", rows)
	}
	for i := range want {
		if rows[i] != want[i] {
			t.Errorf("row %d = %+v, want %+v", i, rows[i], want[i])
		}
	}
	wantRej := map[int]Reason{5: ReasonBadVerdict, 6: ReasonBadWeek, 7: ReasonBadWeek, 8: ReasonBadNumber,
		9: ReasonBadNumber, 10: ReasonMissingField, 11: ReasonFieldCount}
	if len(rejs) != len(wantRej) {
		t.Fatalf("rejections %+v", rejs)
	}
	for _, rej := range rejs {
		if rej.Reason != wantRej[rej.Line] {
			t.Errorf("line %d: %v (%s), want %v", rej.Line, rej.Reason, rej.Msg, wantRej[rej.Line])
		}
	}
}

func TestVerdictReaderHeader(t *testing.T) {
	for _, tt := range []struct {
		in   string
		want error
	}{
		{"", ErrEmptyFile},
		{"study_id,study_week,score,verdict,model_name\n", ErrMissingColumn},
		{"study_id,study_week,score,verdict,model_name,model_version,notes\n", ErrUnknownColumn},
	} {
		_, _, err := readVerdicts(t, tt.in)
		if !errors.Is(err, tt.want) {
			t.Errorf("%q: err %v, want %v", tt.in, err, tt.want)
		}
	}
}

// The file's verdict words are the screen's own, in any letter case.
func TestParseVerdictWords(t *testing.T) {
	for _, tt := range []struct {
		in   string
		want screen.Verdict
	}{
		{"positive", screen.Positive}, {"NEGATIVE", screen.Negative}, {" Insufficient ", screen.Insufficient},
	} {
		got, err := screen.ParseVerdict(tt.in)
		if err != nil || got != tt.want {
			t.Errorf("ParseVerdict(%q) = %q, %v; want %q", tt.in, got, err, tt.want)
		}
	}
	for _, bad := range []string{"", "maybe", "pos", "1"} {
		if got, err := screen.ParseVerdict(bad); err == nil {
			t.Errorf("ParseVerdict(%q) = %q, want an error", bad, got)
		}
	}
}

// FuzzVerdictReader feeds arbitrary bytes to the verdicts reader: no panics,
// and accepted rows keep their invariants.
func FuzzVerdictReader(f *testing.F) {
	f.Add([]byte("study_id,study_week,score,verdict,model_name,model_version\nS-1,0,0.5,positive,m,1\nS-1,x,,maybe,,\n"))
	f.Add([]byte("verdict,score,study_week,study_id,model_version,model_name\n\"negative\",\"1e-3\",\"12\",\"S,2\",v,m\n"))
	f.Fuzz(func(t *testing.T, in []byte) {
		vr := NewVerdictReader(bytes.NewReader(in), "fuzz.csv")
		for vr.Next() {
			if rej := vr.Rejection(); rej != nil {
				if rej.Reason == 0 || rej.Reason >= numReasons {
					t.Fatalf("bad rejection %+v", rej)
				}
				continue
			}
			r := vr.Verdict()
			if r.StudyID == "" || r.Week < 0 || r.ModelName == "" || r.ModelVersion == "" ||
				(r.Verdict != screen.Positive && r.Verdict != screen.Negative && r.Verdict != screen.Insufficient) {
				t.Fatalf("bad row %+v", r)
			}
		}
		var fe *FileError
		if err := vr.Err(); err != nil && !errors.As(err, &fe) {
			t.Fatalf("error %v is not a FileError", err)
		}
	})
}

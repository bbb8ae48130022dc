package db_test

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

func externalRows(t *testing.T, s *db.Store) string {
	t.Helper()
	rows, err := s.Pool().Query(context.Background(), `SELECT participant_id, week, model_name, model_version, coalesce(score::text, 'null'), verdict, import_id
		FROM external_verdicts ORDER BY 1, 2, 3, 4`)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	var b strings.Builder
	for rows.Next() {
		var pid, imp int64
		var week int16
		var model, ver, score, verdict string
		if err := rows.Scan(&pid, &week, &model, &ver, &score, &verdict, &imp); err != nil {
			t.Fatal(err)
		}
		fmt.Fprintf(&b, "%d/%d/%s/%s/%s/%s/%d\n", pid, week, model, ver, score, verdict, imp)
	}
	return b.String()
}

func TestImportVerdicts(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	coord := cohort.Actor{Name: "c", Role: cohort.Coordinator}
	v1 := dbtest.AddParticipant(t, s.Pool(), "V-1", enrolDay)
	dbtest.AddParticipant(t, s.Pool(), "V-2", enrolDay)
	file := strings.Join([]string{
		"study_id,study_week,score,verdict,model_name,model_version", // line 1
		"V-1,0,0.12,negative,rhythm-net,2.1",                         // 2 ok
		"V-1,1,0.91,POSITIVE,rhythm-net,2.1",                         // 3 ok (any case)
		"V-2,1,,insufficient,rhythm-net,2.1",                         // 4 ok, no score
		"V-2,1,,insufficient,rhythm-net,2.1",                         // 5 exact repeat: duplicate
		"V-2,1,0.4,negative,rhythm-net,2.1",                          // 6 conflicts with line 4
		"V-9,1,0.5,negative,rhythm-net,2.1",                          // 7 unknown participant
		"V-1,-1,0.5,negative,rhythm-net,2.1",                         // 8 bad week
		"V-1,2,0.5,maybe,rhythm-net,2.1",                             // 9 bad verdict
		"V-1,3,0.5,negative,,2.1",                                    // 10 missing model name
		"V-1,0,0.30,negative,other-model,0.9",                        // 11 ok, other model
	}, "\r\n") + "\r\n"
	got, err := s.ImportVerdicts(ctx, coord, "verdicts.csv", strings.NewReader(file))
	if err != nil {
		t.Fatal(err)
	}
	if got.Rows != 10 || got.Added != 4 || got.Replaced != 0 || got.Duplicates != 1 || got.Rejected != 5 || got.Accepted != 5 {
		t.Fatalf("first import: %+v", got)
	}
	wantRej := map[int]string{6: db.ReasonConflictingRow, 7: "unknown_participant", 8: "bad_week", 9: "bad_verdict", 10: "missing_field"}
	if len(got.Rejections) != len(wantRej) {
		t.Fatalf("rejections %+v", got.Rejections)
	}
	for i, rj := range got.Rejections {
		if wantRej[rj.Line] != rj.Code || (i > 0 && got.Rejections[i-1].Line > rj.Line) {
			t.Errorf("rejection %+v: want code %q, in line order", rj, wantRej[rj.Line])
		}
	}
	var quarantined int
	s.Pool().QueryRow(ctx, `SELECT count(*) FROM import_rejects WHERE import_id = $1`, got.ImportID).Scan(&quarantined)
	if quarantined != 5 {
		t.Fatalf("%d refused lines kept, want 5", quarantined)
	}
	before := externalRows(t, s)
	if strings.Count(before, "\n") != 4 || !strings.Contains(before, "/1/rhythm-net/2.1/null/insufficient/") {
		t.Fatalf("stored verdicts:\n%s", before)
	}

	// The same file again changes nothing.
	again, err := s.ImportVerdicts(ctx, coord, "verdicts.csv", strings.NewReader(file))
	if err != nil {
		t.Fatal(err)
	}
	if again.Added != 0 || again.Replaced != 0 || again.Duplicates != 5 || again.Rejected != 5 || again.SHA256 != got.SHA256 {
		t.Fatalf("second import: %+v", again)
	}
	if after := externalRows(t, s); after != before {
		t.Fatalf("re-import changed stored verdicts:\n%s\nwas\n%s", after, before)
	}

	// A corrected score replaces the stored one.
	fix := "study_id,study_week,score,verdict,model_name,model_version\nV-1,1,0.95,positive,rhythm-net,2.1\n"
	corr, err := s.ImportVerdicts(ctx, coord, "fix.csv", strings.NewReader(fix))
	if err != nil || corr.Replaced != 1 || corr.Added != 0 {
		t.Fatalf("correction: %+v err %v", corr, err)
	}
	ev, err := s.ExternalVerdicts(ctx, v1)
	if err != nil || len(ev) != 3 || ev[2].Week != 1 || ev[2].Score == nil || *ev[2].Score != 0.95 || ev[2].ImportID != corr.ImportID {
		t.Fatalf("external verdicts of V-1: %+v (err %v)", ev, err)
	}

	// A file that cannot be read stores nothing and is recorded as failed.
	_, err = s.ImportVerdicts(ctx, coord, "wrong.csv", strings.NewReader("participant,week\nV-1,1\n"))
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) || ve.Fields["file"] == "" {
		t.Fatalf("bad header: err %v, want a validation error on file", err)
	}
	var failed int
	s.Pool().QueryRow(ctx, `SELECT count(*) FROM imports WHERE kind = 'verdicts_csv' AND status = 'failed' AND file_name = 'wrong.csv'`).Scan(&failed)
	if failed != 1 {
		t.Fatalf("failed import records: %d", failed)
	}
	list, err := s.VerdictImports(ctx, 10)
	if err != nil || len(list) != 4 || list[0].File != "wrong.csv" {
		t.Fatalf("import list %+v err %v", list, err)
	}
	if n := countAudit(t, s, "verdicts.import"); n != 3 {
		t.Fatalf("verdicts.import audited %d times, want 3", n)
	}
}

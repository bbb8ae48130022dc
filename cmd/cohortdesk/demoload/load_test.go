package demoload

import (
	"context"
	"testing"

	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

func TestMain(m *testing.M) { dbtest.Main(m) }

// TestLoadStudiesWithRecordingsOfExactly30s loads the demo at sizes whose
// scripts have recordings of exactly 30 s that are read as AF and referred,
// through the app's own paths, issuing and signing off the referral summaries
// as the demo command does: seed 8 with 150 participants (case QRW-0096-F),
// and, without the race detector (it takes minutes under it), seed 7 with
// 1,200 (case QRW-0128-F). Before the synthesiser kept the scripted length,
// such a recording came out a few samples under 30 s, the app marked it too
// short and refused the scripted referral.
func TestLoadStudiesWithRecordingsOfExactly30s(t *testing.T) {
	sizes := []struct {
		seed         uint64
		participants int
	}{{8, 150}, {7, 1200}}
	if raceEnabled || testing.Short() {
		sizes = sizes[:1]
	}
	for _, sz := range sizes {
		store := db.New(dbtest.Pool(t), nil)
		res, err := Load(context.Background(), store, Options{Seed: sz.seed, Participants: sz.participants, PasswordCost: credential.TestParams,
			Password: "a test password", Secret: []byte("demo load test secret, long enough for codes")})
		if err != nil {
			t.Fatalf("seed %d, %d participants: %v", sz.seed, sz.participants, err)
		}
		if res.Participants != sz.participants || res.Cases == 0 {
			t.Fatalf("seed %d: loaded %d participants, %d cases", sz.seed, res.Participants, res.Cases)
		}
		var referred, exact30 int
		if err := store.Pool().QueryRow(context.Background(), `
			SELECT (SELECT count(*) FROM cases WHERE state = 'referred'),
			       (SELECT count(*) FROM recordings WHERE duration_s = 30 AND NOT too_short)`).Scan(&referred, &exact30); err != nil {
			t.Fatal(err)
		}
		if referred == 0 || exact30 == 0 {
			t.Errorf("seed %d, %d participants: %d referred cases, %d recordings of exactly 30 s kept as diagnostic; want some of each",
				sz.seed, sz.participants, referred, exact30)
		}
	}
}

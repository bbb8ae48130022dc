package dbtest

import (
	"context"
	"math/rand/v2"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/wear"

	"github.com/jackc/pgx/v5/pgxpool"
)

// TB is the part of testing.TB the data helpers use, so one-time benchmark
// setup outside any test can pass its own.
type TB interface {
	Helper()
	Fatalf(format string, args ...any)
}

// Rhythm selects the pattern of synthetic heart-rate readings.
type Rhythm int

const (
	// Steady readings: 62 bpm plus a whole-bpm jitter of -1, 0 or +1, so
	// successive readings differ by about 0.9 bpm on average (hand-worked:
	// E|X-Y| for independent uniforms on {-1, 0, 1} is 8/9), far below the
	// illustrative 8 bpm threshold of the default protocol.
	Steady Rhythm = iota
	// Irregular readings: each independent and uniform on 70-120 bpm, so
	// successive readings differ by about 17 bpm on average (hand-worked:
	// E|X-Y| for independent uniforms on n = 51 values is (n^2-1)/(3n) = 17.0),
	// well above the default thresholds.
	Irregular
)

// SynthHR makes fictional heart-rate readings from start, one every cadence,
// for the given hours. It is deterministic for a given seed.
func SynthHR(seed uint64, r Rhythm, start time.Time, hours int, cadence time.Duration) cohort.Samples {
	rng := rand.New(rand.NewPCG(seed, uint64(r)+11))
	var s cohort.Samples
	t0 := start.UnixMilli()
	end := t0 + int64(hours)*3600_000
	for t := t0; t < end; t += cadence.Milliseconds() {
		var v int32
		switch r {
		case Steady:
			v = 62 + int32(rng.IntN(3)) - 1
		case Irregular:
			v = 70 + int32(rng.IntN(51))
		}
		s.Append(t, v)
	}
	return s
}

// PutWearWeek stores one participant-week series the way imports do: encoded
// with the wear codec, one row per participant, week and kind.
func PutWearWeek(tb TB, pool *pgxpool.Pool, participantID int64, week int, kind cohort.Kind, s cohort.Samples) {
	tb.Helper()
	if s.Len() == 0 {
		tb.Fatalf("dbtest: PutWearWeek: participant %d week %d: no readings", participantID, week)
	}
	_, err := pool.Exec(context.Background(), `
		INSERT INTO wear_weeks (participant_id, week, kind, n, first_ms, last_ms, data) VALUES ($1, $2, $3, $4, $5, $6, $7)
		ON CONFLICT (participant_id, week, kind) DO UPDATE SET n = excluded.n, first_ms = excluded.first_ms,
		  last_ms = excluded.last_ms, data = excluded.data, updated_at = now()`,
		participantID, week, int16(kind), s.Len(), s.T[0], s.T[s.Len()-1], wear.Encode(s, kind))
	if err != nil {
		tb.Fatalf("dbtest: PutWearWeek: %v", err)
	}
}

// AddParticipant enrols a fictional participant in UTC at a site (created on
// first use) and returns its id.
func AddParticipant(tb TB, pool *pgxpool.Pool, studyID string, enrolled cohort.Date) int64 {
	tb.Helper()
	ctx := context.Background()
	if _, err := pool.Exec(ctx, `INSERT INTO sites (code, name) VALUES ('TS', 'Test site') ON CONFLICT (code) DO NOTHING`); err != nil {
		tb.Fatalf("dbtest: AddParticipant: %v", err)
	}
	var id int64
	err := pool.QueryRow(ctx, `INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
		SELECT $1, id, 'UTC', $2 FROM sites WHERE code = 'TS' RETURNING id`, studyID, enrolled.String()).Scan(&id)
	if err != nil {
		tb.Fatalf("dbtest: AddParticipant: %v", err)
	}
	return id
}

// WeekStart is the first instant of a UTC participant's study week.
func WeekStart(enrolled cohort.Date, week int) time.Time {
	start, _ := cohort.WeekBounds(enrolled, time.UTC, week)
	return start
}

package db

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"

	"github.com/jackc/pgx/v5"
)

// JobScreen is the job kind that screens participant-weeks with a protocol
// version and stores the results.
const JobScreen = "screen"

// screenPayload is the payload of a screening job.
type screenPayload struct {
	ProtocolID     int     `json:"protocol_id"`
	ParticipantIDs []int64 `json:"participant_ids,omitempty"` // empty: every participant
}

// EnqueueScreen queues the screening of the given participants (nil or empty:
// every participant) with a protocol version (0: the version active now) and
// returns the job id at once: the import that calls it does not wait. Every
// week of each participant is screened again, since a new week can change a
// personal baseline and the cost is small next to reading the data.
func (s *Store) EnqueueScreen(ctx context.Context, participantIDs []int64, protocolID int) (int64, error) {
	var id int64
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		id, err = enqueueScreen(ctx, tx, participantIDs, protocolID)
		return err
	})
	if err != nil {
		return 0, fmt.Errorf("db: %w", err)
	}
	return id, nil
}

// EnqueueScreenBy is EnqueueScreen on behalf of a person, who is named on the
// progress page and in the audit trail.
func (s *Store) EnqueueScreenBy(ctx context.Context, a cohort.Actor, participantIDs []int64, protocolID int) (int64, error) {
	p, err := s.screenProtocol(ctx, protocolID)
	if err != nil {
		return 0, err
	}
	var id int64
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		if id, err = enqueue(ctx, tx, screenJob(p, participantIDs, a.Label())); err != nil {
			return err
		}
		return audit(ctx, tx, a, "screen.enqueue", "job", strconv.FormatInt(id, 10), nil,
			map[string]any{"protocol_id": p.ID, "participants": len(participantIDs)})
	})
	return id, mapErr("enqueue screening", err)
}

// enqueueScreen is EnqueueScreen inside the caller's transaction, for an
// import that wants its rows and the screening job that follows them to commit
// together (a crash between the two would otherwise leave data unscreened).
func enqueueScreen(ctx context.Context, tx pgx.Tx, participantIDs []int64, protocolID int) (int64, error) {
	q := `SELECT ` + protocolCols + ` FROM protocols WHERE active`
	args := []any{}
	if protocolID != 0 {
		q, args = `SELECT `+protocolCols+` FROM protocols WHERE id = $1`, []any{protocolID}
	}
	p, err := scanProtocol(tx.QueryRow(ctx, q, args...))
	if err != nil {
		return 0, mapErr("enqueue screening", err)
	}
	id, err := enqueue(ctx, tx, screenJob(p, participantIDs, "system"))
	return id, mapErr("enqueue screening", err)
}

func (s *Store) screenProtocol(ctx context.Context, id int) (ProtocolVersion, error) {
	if id == 0 {
		return s.ActiveProtocol(ctx)
	}
	return s.Protocol(ctx, id)
}

func screenJob(p ProtocolVersion, ids []int64, by string) NewJob {
	who := "every participant"
	switch len(ids) {
	case 0:
	case 1:
		who = "1 participant"
	default:
		who = strconv.Itoa(len(ids)) + " participants"
	}
	return NewJob{Kind: JobScreen, Label: "Screen " + who + " with " + p.Label(), CreatedBy: by,
		Payload: screenPayload{ProtocolID: p.ID, ParticipantIDs: ids}}
}

// AfterScreen runs after a screening run has stored its results under the
// active protocol version, with the participants screened; it is where
// follow-up cases are opened or extended (Store.SyncCases). An error fails the
// run, which is retried: the results are stored again unchanged, so the hook
// must be idempotent.
type AfterScreen func(ctx context.Context, protocolID int, participantIDs []int64) error

// Screener runs screening: as a job handler for the workers and directly.
type Screener struct {
	store *Store
	// After is called once a run has stored its results, only when the
	// version screened is the active one (results of other versions are
	// for comparison and must not open cases). nil: nothing is called.
	After AfterScreen
	// BatchRows is how many results are written per transaction; default 500.
	BatchRows int
}

// NewScreener returns a Screener over s with an after-screen hook (may be nil).
func NewScreener(s *Store, after AfterScreen) *Screener {
	return &Screener{store: s, After: after}
}

// Handlers maps the job kinds the screener runs to their functions, for a
// Worker: screening runs and threshold sweeps.
func (sc *Screener) Handlers() map[string]JobFunc {
	return map[string]JobFunc{JobScreen: sc.handle, JobSweep: sc.store.sweepJob}
}

func (sc *Screener) handle(ctx context.Context, j Job, progress func(done, total int64) error) (string, error) {
	var pl screenPayload
	if err := json.Unmarshal(j.Payload, &pl); err != nil {
		return "", Permanent(fmt.Errorf("screening job %d: payload: %w", j.ID, err))
	}
	sum, err := sc.ScreenNow(ctx, pl.ParticipantIDs, pl.ProtocolID, progress)
	if errors.Is(err, cohort.ErrNotFound) {
		return "", Permanent(err)
	}
	if err != nil {
		return "", err
	}
	return sum.String(), nil
}

// ScreenSummary counts what a screening run did.
type ScreenSummary struct {
	ProtocolID   int
	Protocol     string // label, e.g. "standard v2"
	Participants int
	Weeks        int
	Positive     int
	Negative     int
	Insufficient int
}

// String is the outcome line shown on the progress page.
func (s ScreenSummary) String() string {
	return fmt.Sprintf("%s: %d participant-weeks of %d participants; %d positive, %d negative, %d insufficient data",
		s.Protocol, s.Weeks, s.Participants, s.Positive, s.Negative, s.Insufficient)
}

// ScreenNow screens every stored week of the given participants (nil or empty:
// everyone) with a protocol version (0: the active one), upserting one result
// per participant, version and week, and waits for it. progress (may be nil)
// hears weeks done out of weeks in all. Re-running a version on unchanged data
// stores byte-identical results: the screen is deterministic and the result
// JSON is stored as computed.
//
// With personal baselines on, weeks 0..K-1 are screened against absolute
// thresholds and the baseline of the later weeks is built from their results,
// which EachWearWeek's week order delivers first.
func (sc *Screener) ScreenNow(ctx context.Context, participantIDs []int64, protocolID int, progress func(done, total int64) error) (ScreenSummary, error) {
	s := sc.store
	pv, err := s.screenProtocol(ctx, protocolID)
	if err != nil {
		return ScreenSummary{}, err
	}
	p := pv.Params
	if err := p.Validate(); err != nil {
		return ScreenSummary{}, Permanent(fmt.Errorf("db: protocol %s cannot screen: %w", pv.Label(), err))
	}
	sum := ScreenSummary{ProtocolID: pv.ID, Protocol: pv.Label()}
	began := time.Now()
	total, err := s.countWeeks(ctx, participantIDs)
	if err != nil {
		return sum, err
	}
	if progress == nil {
		progress = func(int64, int64) error { return nil }
	}
	if err := progress(0, total); err != nil {
		return sum, err
	}
	now := s.now().UnixMilli()
	w := resultWriter{store: s, protocolID: pv.ID, max: sc.BatchRows}
	if w.max <= 0 {
		w.max = 500
	}
	var screened []int64
	var curPID int64 = -1
	var first []screen.Result // this participant's baseline-week results
	var base *screen.Baseline
	baseBuilt := false
	done := int64(0)
	err = s.EachWearWeek(ctx, participantIDs, func(part Participant, wk *cohort.Week) error {
		if part.ID != curPID {
			curPID, first, base, baseBuilt = part.ID, first[:0], nil, false
			screened = append(screened, part.ID)
			if err := progress(done, total); err != nil {
				return err
			}
		}
		var use *screen.Baseline
		if p.Baseline.Enabled && wk.Week >= p.Baseline.Weeks {
			if !baseBuilt {
				b, err := screen.NewBaseline(p, first)
				if err != nil {
					return fmt.Errorf("participant %d: %w", part.ID, err)
				}
				base, baseBuilt = b, true
			}
			use = base
		}
		res, err := screen.Screen(wk, p, now, use)
		if err != nil {
			return fmt.Errorf("db: screen participant %d week %d: %w", part.ID, wk.Week, err)
		}
		if p.Baseline.Enabled && wk.Week < p.Baseline.Weeks {
			first = append(first, res)
		}
		switch res.Verdict {
		case screen.Positive:
			sum.Positive++
		case screen.Negative:
			sum.Negative++
		default:
			sum.Insufficient++
		}
		sum.Weeks++
		done++
		if err := w.add(ctx, part.ID, res); err != nil {
			return err
		}
		return nil
	})
	if err == nil {
		err = w.flush(ctx)
	}
	if err != nil {
		return sum, err
	}
	sum.Participants = len(screened)
	Work.screened(int64(sum.Weeks), time.Since(began))
	if err := progress(done, total); err != nil {
		return sum, err
	}
	if err := s.Audit(ctx, cohort.System, "screen.run", "protocol", strconv.Itoa(pv.ID), nil,
		map[string]any{"summary": sum.String(), "participants": len(screened)}); err != nil {
		return sum, err
	}
	if sc.After != nil && len(screened) > 0 {
		active, err := s.ActiveProtocol(ctx)
		if err != nil && !errors.Is(err, cohort.ErrNotFound) {
			return sum, err
		}
		if err == nil && active.ID == pv.ID {
			if err := sc.After(ctx, pv.ID, screened); err != nil {
				return sum, fmt.Errorf("db: after screening: %w", err)
			}
		}
	}
	return sum, nil
}

// countWeeks counts the stored participant-weeks of the participants (all when
// ids is empty), the total of a screening run's progress.
func (s *Store) countWeeks(ctx context.Context, ids []int64) (int64, error) {
	var n int64
	var err error
	if len(ids) == 0 {
		err = s.pool.QueryRow(ctx, `SELECT count(*) FROM (SELECT DISTINCT participant_id, week FROM wear_weeks) w`).Scan(&n)
	} else {
		err = s.pool.QueryRow(ctx, `SELECT count(*) FROM (SELECT DISTINCT participant_id, week FROM wear_weeks WHERE participant_id = ANY($1)) w`, ids).Scan(&n)
	}
	return n, mapErr("count weeks", err)
}

// resultWriter batches results and upserts them, marking the protocol used in
// the same transaction as its first results.
type resultWriter struct {
	store      *Store
	protocolID int
	max        int
	marked     bool

	pid     []int64
	week    []int16
	verdict []string
	reason  []string
	result  []string
	digest  []string
	hours   []float32
}

func (w *resultWriter) add(ctx context.Context, pid int64, r screen.Result) error {
	b, err := json.Marshal(r)
	if err != nil {
		return fmt.Errorf("db: result of participant %d week %d: %w", pid, r.Week, err)
	}
	w.pid = append(w.pid, pid)
	w.week = append(w.week, int16(r.Week))
	w.verdict = append(w.verdict, string(r.Verdict))
	w.reason = append(w.reason, r.Reason)
	w.result = append(w.result, string(b))
	w.digest = append(w.digest, r.InputDigest)
	w.hours = append(w.hours, float32(r.WearHours))
	if len(w.pid) >= w.max {
		return w.flush(ctx)
	}
	return nil
}

func (w *resultWriter) flush(ctx context.Context) error {
	if len(w.pid) == 0 {
		return nil
	}
	err := w.store.inTx(ctx, func(tx pgx.Tx) error {
		if !w.marked {
			if err := markProtocolUsed(ctx, tx, w.protocolID); err != nil {
				return err
			}
		}
		_, err := tx.Exec(ctx, `
			INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours, computed_at)
			SELECT u.pid, $1, u.week, u.verdict, u.reason, u.result::json, u.digest, u.hours, clock_timestamp()
			FROM unnest($2::bigint[], $3::smallint[], $4::text[], $5::text[], $6::text[], $7::text[], $8::real[])
			     AS u(pid, week, verdict, reason, result, digest, hours)
			ON CONFLICT (participant_id, protocol_id, week) DO UPDATE SET
			  verdict = excluded.verdict, reason = excluded.reason, result = excluded.result,
			  input_digest = excluded.input_digest, wear_hours = excluded.wear_hours, computed_at = excluded.computed_at`,
			w.protocolID, w.pid, w.week, w.verdict, w.reason, w.result, w.digest, w.hours)
		return err
	})
	if err != nil {
		return mapErr("store screening results", err)
	}
	w.marked = true
	w.pid, w.week, w.verdict, w.reason = w.pid[:0], w.week[:0], w.verdict[:0], w.reason[:0]
	w.result, w.digest, w.hours = w.result[:0], w.digest[:0], w.hours[:0]
	return nil
}

// StoredResult is one stored screening result with its decoded figures.
type StoredResult struct {
	ParticipantID int64
	ProtocolID    int
	Week          int
	Verdict       string
	Reason        string
	WearHours     float64
	InputDigest   string
	// JSON is the result exactly as stored.
	JSON json.RawMessage
	// Result is JSON decoded.
	Result screen.Result
}

// ScreenResults lists a participant's results under one protocol version in
// week order.
func (s *Store) ScreenResults(ctx context.Context, participantID int64, protocolID int) ([]StoredResult, error) {
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+storedResultCols+`
		FROM screen_results WHERE participant_id = $1 AND protocol_id = $2 ORDER BY week`, participantID, protocolID)
	if err != nil {
		return nil, mapErr("screen results", err)
	}
	out, err := pgx.CollectRows(rows, scanStoredResult)
	return out, mapErr("screen results", err)
}

// storedResultCols are the columns scanStoredResult reads.
const storedResultCols = `participant_id, protocol_id, week, verdict, reason, wear_hours, input_digest, result::text`

func scanStoredResult(r pgx.CollectableRow) (StoredResult, error) {
	var sr StoredResult
	var week int16
	var hours float32
	var js string
	if err := r.Scan(&sr.ParticipantID, &sr.ProtocolID, &week, &sr.Verdict, &sr.Reason, &hours, &sr.InputDigest, &js); err != nil {
		return sr, err
	}
	sr.Week, sr.WearHours, sr.JSON = int(week), float64(hours), json.RawMessage(js)
	if err := json.Unmarshal(sr.JSON, &sr.Result); err != nil {
		return sr, fmt.Errorf("result of week %d: %w", sr.Week, err)
	}
	return sr, nil
}

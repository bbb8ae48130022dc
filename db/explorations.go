package db

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"
	"time"

	"cohortdesk/cohort"

	"github.com/jackc/pgx/v5"
)

// JobExplore is the job kind that computes a threshold sweep (Explore) and
// stores its result with the exploration that asked for it.
const JobExplore = "explore"

// exploreRequest is what a sweep asks for: the job's payload, and what the
// exploration records.
type exploreRequest struct {
	ProtocolID int       `json:"protocol_id"`
	Param      string    `json:"param"`
	Values     []float64 `json:"values"`
}

// ExplorationRun is one threshold sweep asked for: what, by whom, the job
// that computes it, and the result once the job is done.
type ExplorationRun struct {
	ID         int64
	ProtocolID int
	Param      string
	Values     []float64
	CreatedBy  string
	CreatedAt  time.Time
	Job        Job
	Result     *Exploration // nil until the job is done
}

// StartExploration checks a sweep, records it and queues the job that
// computes it, and returns the exploration's id at once: a sweep reads every
// stored reading, which at study scale takes minutes. A sweep that cannot run
// is refused with a *cohort.ValidationError and nothing is queued.
func (s *Store) StartExploration(ctx context.Context, a cohort.Actor, protocolID int, param string, values []float64) (int64, error) {
	pv, err := s.Protocol(ctx, protocolID)
	if err != nil {
		return 0, err
	}
	if err := checkSweep(pv.Params, param, values); err != nil {
		return 0, err
	}
	req := exploreRequest{ProtocolID: pv.ID, Param: param, Values: values}
	var id int64
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		job, err := enqueue(ctx, tx, NewJob{Kind: JobExplore, Payload: req, MaxAttempts: 2, CreatedBy: a.Label(),
			Label: fmt.Sprintf("threshold sweep of %s under %s, %d values", param, pv.Label(), len(values))})
		if err != nil {
			return err
		}
		sweep, err := json.Marshal(values)
		if err != nil {
			return err
		}
		if err := tx.QueryRow(ctx, `INSERT INTO explorations (protocol_id, param, sweep, job_id, created_by) VALUES ($1, $2, $3, $4, $5) RETURNING id`,
			pv.ID, param, sweep, job, a.Label()).Scan(&id); err != nil {
			return err
		}
		return audit(ctx, tx, a, "exploration.start", "exploration", strconv.FormatInt(id, 10), nil,
			map[string]any{"protocol_id": pv.ID, "param": param, "values": values, "job_id": job})
	})
	return id, mapErr("start exploration", err)
}

// exploreJob is the worker's handler for JobExplore.
func (s *Store) exploreJob(ctx context.Context, j Job, progress func(done, total int64) error) (string, error) {
	var req exploreRequest
	if err := json.Unmarshal(j.Payload, &req); err != nil {
		return "", Permanent(fmt.Errorf("exploration job %d: payload: %w", j.ID, err))
	}
	ex, err := s.explore(ctx, req.ProtocolID, req.Param, req.Values, progress)
	var ve *cohort.ValidationError
	if errors.As(err, &ve) || errors.Is(err, cohort.ErrNotFound) {
		return "", Permanent(err)
	}
	if err != nil {
		return "", err
	}
	raw, err := json.Marshal(ex)
	if err != nil {
		return "", Permanent(err)
	}
	tag, err := s.pool.Exec(ctx, `UPDATE explorations SET result = $1 WHERE job_id = $2`, raw, j.ID)
	if err != nil {
		return "", mapErr("store exploration", err)
	}
	if tag.RowsAffected() != 1 {
		return "", Permanent(fmt.Errorf("exploration job %d: no exploration records it", j.ID))
	}
	return fmt.Sprintf("%d participant-weeks, %d values of %s", ex.Weeks, len(ex.Rows), req.Param), nil
}

// explorationCols are read with the exploration's job (alias j).
var explorationCols = `e.id, e.protocol_id, e.param, e.sweep, e.created_by, e.created_at, e.result, ` + prefixCols("j.", jobCols)

func scanExploration(row pgx.Row) (ExplorationRun, error) {
	var r ExplorationRun
	var sweep, result []byte
	dest := append([]any{&r.ID, &r.ProtocolID, &r.Param, &sweep, &r.CreatedBy, &r.CreatedAt, &result}, jobFields(&r.Job)...)
	if err := row.Scan(dest...); err != nil {
		return r, err
	}
	if err := json.Unmarshal(sweep, &r.Values); err != nil {
		return r, fmt.Errorf("exploration %d: values: %w", r.ID, err)
	}
	if result != nil {
		var ex Exploration
		if err := json.Unmarshal(result, &ex); err != nil {
			return r, fmt.Errorf("exploration %d: result: %w", r.ID, err)
		}
		r.Result = &ex
	}
	return r, nil
}

// Exploration reads one threshold sweep with its job and, once done, its
// result.
func (s *Store) Exploration(ctx context.Context, id int64) (ExplorationRun, error) {
	r, err := scanExploration(s.pool.QueryRow(ctx, `SELECT `+explorationCols+`
		FROM explorations e JOIN jobs j ON j.id = e.job_id WHERE e.id = $1`, id))
	return r, mapErr("exploration", err)
}

// Explorations lists the latest threshold sweeps, newest first.
func (s *Store) Explorations(ctx context.Context, limit int) ([]ExplorationRun, error) {
	rows, err := s.pool.Query(ctx, `SELECT `+explorationCols+`
		FROM explorations e JOIN jobs j ON j.id = e.job_id ORDER BY e.id DESC LIMIT $1`, limit)
	if err != nil {
		return nil, mapErr("explorations", err)
	}
	defer rows.Close()
	var out []ExplorationRun
	for rows.Next() {
		r, err := scanExploration(rows)
		if err != nil {
			return nil, mapErr("explorations", err)
		}
		out = append(out, r)
	}
	return out, mapErr("explorations", rows.Err())
}

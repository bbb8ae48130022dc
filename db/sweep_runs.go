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

// JobSweep is the job kind that computes a threshold sweep (Sweep) and
// stores its result with the run that asked for it.
const JobSweep = "sweep"

// sweepRequest is what a sweep asks for: the job's payload, and what the
// run records.
type sweepRequest struct {
	ProtocolID int       `json:"protocol_id"`
	Param      string    `json:"param"`
	Values     []float64 `json:"values"`
}

// SweepRun is one threshold sweep asked for: what, by whom, the job that
// computes it, and the result once the job is done.
type SweepRun struct {
	ID         int64
	ProtocolID int
	Param      string
	Values     []float64
	CreatedBy  string
	CreatedAt  time.Time
	Job        Job
	Result     *SweepResult // nil until the job is done
}

// StartSweep checks a sweep, records it and queues the job that computes it,
// and returns the run's id at once: a sweep reads every stored reading, which
// at study scale takes minutes. A sweep that cannot run is refused with a
// *cohort.ValidationError (screen.CheckSweep) and nothing is queued.
func (s *Store) StartSweep(ctx context.Context, a cohort.Actor, protocolID int, param string, values []float64) (int64, error) {
	pv, err := s.Protocol(ctx, protocolID)
	if err != nil {
		return 0, err
	}
	if err := screen.CheckSweep(pv.Params, param, values); err != nil {
		return 0, err
	}
	req := sweepRequest{ProtocolID: pv.ID, Param: param, Values: values}
	var id int64
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		job, err := enqueue(ctx, tx, NewJob{Kind: JobSweep, Payload: req, MaxAttempts: 2, CreatedBy: a.Label(),
			Label: fmt.Sprintf("threshold sweep of %s under %s, %d values", pv.Params.ParamName(param), pv.Label(), len(values))})
		if err != nil {
			return err
		}
		swept, err := json.Marshal(values)
		if err != nil {
			return err
		}
		if err := tx.QueryRow(ctx, `INSERT INTO sweeps (protocol_id, param, sweep_values, job_id, created_by) VALUES ($1, $2, $3, $4, $5) RETURNING id`,
			pv.ID, param, swept, job, a.Label()).Scan(&id); err != nil {
			return err
		}
		return audit(ctx, tx, a, "sweep.start", "sweep", strconv.FormatInt(id, 10), nil,
			map[string]any{"protocol_id": pv.ID, "param": param, "values": values, "job_id": job})
	})
	return id, mapErr("start sweep", err)
}

// sweepJob is the worker's handler for JobSweep.
func (s *Store) sweepJob(ctx context.Context, j Job, progress func(done, total int64) error) (string, error) {
	var req sweepRequest
	if err := json.Unmarshal(j.Payload, &req); err != nil {
		return "", Permanent(fmt.Errorf("sweep job %d: payload: %w", j.ID, err))
	}
	res, err := s.sweep(ctx, req.ProtocolID, req.Param, req.Values, progress)
	var ve *cohort.ValidationError
	if errors.As(err, &ve) || errors.Is(err, cohort.ErrNotFound) {
		return "", Permanent(err)
	}
	if err != nil {
		return "", err
	}
	raw, err := json.Marshal(res)
	if err != nil {
		return "", Permanent(err)
	}
	tag, err := s.pool.Exec(ctx, `UPDATE sweeps SET result = $1 WHERE job_id = $2`, raw, j.ID)
	if err != nil {
		return "", mapErr("store sweep", err)
	}
	if tag.RowsAffected() != 1 {
		return "", Permanent(fmt.Errorf("sweep job %d: no sweep records it", j.ID))
	}
	return fmt.Sprintf("%d participant-weeks, %d values of %s", res.Weeks, len(res.Rows), res.Protocol.Params.ParamName(req.Param)), nil
}

// sweepCols are read with the sweep's job (alias j).
var sweepCols = `sw.id, sw.protocol_id, sw.param, sw.sweep_values, sw.created_by, sw.created_at, sw.result, ` + prefixCols("j.", jobCols)

func scanSweepRun(row pgx.Row) (SweepRun, error) {
	var r SweepRun
	var values, result []byte
	dest := append([]any{&r.ID, &r.ProtocolID, &r.Param, &values, &r.CreatedBy, &r.CreatedAt, &result}, jobFields(&r.Job)...)
	if err := row.Scan(dest...); err != nil {
		return r, err
	}
	if err := json.Unmarshal(values, &r.Values); err != nil {
		return r, fmt.Errorf("sweep %d: values: %w", r.ID, err)
	}
	if result != nil {
		var res SweepResult
		if err := json.Unmarshal(result, &res); err != nil {
			return r, fmt.Errorf("sweep %d: result: %w", r.ID, err)
		}
		r.Result = &res
	}
	return r, nil
}

// SweepRun reads one threshold sweep with its job and, once done, its result.
func (s *Store) SweepRun(ctx context.Context, id int64) (SweepRun, error) {
	r, err := scanSweepRun(s.reader(ctx).QueryRow(ctx, `SELECT `+sweepCols+`
		FROM sweeps sw JOIN jobs j ON j.id = sw.job_id WHERE sw.id = $1`, id))
	return r, mapErr("sweep", err)
}

// SweepRuns lists the latest threshold sweeps, newest first.
func (s *Store) SweepRuns(ctx context.Context, limit int) ([]SweepRun, error) {
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+sweepCols+`
		FROM sweeps sw JOIN jobs j ON j.id = sw.job_id ORDER BY sw.id DESC LIMIT $1`, limit)
	if err != nil {
		return nil, mapErr("sweeps", err)
	}
	defer rows.Close()
	var out []SweepRun
	for rows.Next() {
		r, err := scanSweepRun(rows)
		if err != nil {
			return nil, mapErr("sweeps", err)
		}
		out = append(out, r)
	}
	return out, mapErr("sweeps", rows.Err())
}

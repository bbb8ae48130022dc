package db

import (
	"context"
	"crypto/sha256"
	"encoding/json"
	"errors"
	"fmt"
	"hash"
	"io"
	"sort"
	"strconv"
	"sync/atomic"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/cohort/wear"

	"github.com/jackc/pgx/v5"
)

// Import kinds stored in imports.kind.
const (
	ImportReadingsCSV = "readings_csv"
	ImportFHIRBundle  = "fhir_bundle"
	ImportVerdictsCSV = "verdicts_csv"
)

// Import-level rejection reasons, besides the parser's own (cohort/wear).
const (
	reasonImplausible = "implausible"
	reasonFuture      = "future_time"
)

// reasonLabels are the words of the import-level reasons.
var reasonLabels = map[string]string{
	reasonImplausible: "value outside the plausible range of the active protocol",
	reasonFuture:      "timestamp in the future",
}

// ReasonLabel is the human label of a stored rejection reason.
func ReasonLabel(code string) string {
	if l, ok := reasonLabels[code]; ok {
		return l
	}
	if r, err := wear.ParseReason(code); err == nil {
		return r.Label()
	}
	return code
}

// ImportOptions describe one file to import.
type ImportOptions struct {
	Kind     string // ImportReadingsCSV or ImportFHIRBundle
	FileName string
	Size     int64 // bytes, when known, for progress
	// Budget bounds the memory holding readings before they are written
	// (the grouper may use about twice this). Zero means 64 MiB.
	Budget int
	// NoScreening leaves out the background screening job that an import
	// otherwise queues for the participants whose data changed (the demo
	// loader screens at once instead).
	NoScreening bool
	// ID continues an import that BeginImport recorded while its file was
	// being received; zero records a new one.
	ID int64
}

// ReasonCount is how many rows were refused for one reason, with the first
// few as examples.
type ReasonCount struct {
	Code     string    `json:"code"`
	Label    string    `json:"label"`
	Count    int64     `json:"count"`
	Examples []Example `json:"examples"`
}

// Example is one refused row.
type Example struct {
	Line    int64  `json:"line"`
	Message string `json:"message"`
}

// ImportReport is what an import did, per file.
type ImportReport struct {
	ID           int64
	Kind         string
	FileName     string
	Status       string
	SHA256       string
	Size         int64
	StartedAt    time.Time
	FinishedAt   *time.Time
	Actor        string
	Rows         int64 // rows read, accepted or not
	Accepted     int64 // new readings stored
	Rejected     int64
	Duplicates   int64 // readings already stored (or repeated in the file), skipped
	Conflicts    int64 // same instant, different value: both kept
	Reasons      []ReasonCount
	Message      string
	BytesRead    int64
	Participants []int64 `json:"-"` // participants whose data changed
	SameAs       int64   // an earlier completed import of the identical file
}

const maxExamples = 5

// ErrImportRefused means the whole file was refused; nothing was stored.
var ErrImportRefused = errors.New("import refused")

// countingReader counts and hashes what passes through it.
type countingReader struct {
	r io.Reader
	n atomic.Int64
	h hash.Hash
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	if n > 0 {
		c.h.Write(p[:n])
		c.n.Add(int64(n))
	}
	return n, err
}

// batch is a block of parsed rows and rejections handed from the parsing
// goroutine to the storing one.
type batch struct {
	rows []wear.Row
	rejs []*wear.Rejection
	err  error
}

// ImportReadings streams one readings file (CSV or FHIR Bundle) into the
// store. The file is parsed on one goroutine while the other groups, merges
// and writes, so memory stays bounded by the budget whatever the file size.
//
// The file is atomic: everything is written in one transaction, so a failure,
// a refusal or a killed process leaves nothing of it. Readings already stored
// are merged, not duplicated, so importing the same file twice changes
// nothing. Refused rows are kept in import_rejects with their line. Imports run
// one at a time (an advisory lock) so two files touching the same week cannot
// overwrite each other's merge.
func (s *Store) ImportReadings(ctx context.Context, a cohort.Actor, r io.Reader, o ImportOptions) (ImportReport, error) {
	if o.Kind != ImportReadingsCSV && o.Kind != ImportFHIRBundle {
		return ImportReport{}, fmt.Errorf("db: import kind %q unknown", o.Kind)
	}
	if o.Budget <= 0 {
		o.Budget = 64 << 20
	}
	rep := ImportReport{Kind: o.Kind, FileName: o.FileName, Size: o.Size, Actor: a.Label(), StartedAt: s.now()}
	var actorID *int64
	if a.UserID != 0 {
		actorID = &a.UserID
	}
	if o.ID != 0 {
		rep.ID = o.ID
		if _, err := s.pool.Exec(ctx, `UPDATE imports SET size_bytes = $2, bytes_read = 0, heartbeat_at = now() WHERE id = $1`, o.ID, o.Size); err != nil {
			return rep, mapErr("import start", err)
		}
	} else if err := s.pool.QueryRow(ctx, `INSERT INTO imports (kind, file_name, file_sha256, size_bytes, actor_id, actor, started_at, heartbeat_at)
		VALUES ($1, $2, '', $3, $4, $5, $6, $6) RETURNING id`, o.Kind, o.FileName, o.Size, actorID, rep.Actor, rep.StartedAt).Scan(&rep.ID); err != nil {
		return rep, mapErr("import start", err)
	}

	cr := &countingReader{r: r, h: sha256.New()}
	// Progress and liveness, outside the import's transaction.
	hbCtx, stopHB := context.WithCancel(context.WithoutCancel(ctx))
	hbDone := make(chan struct{})
	go func() {
		defer close(hbDone)
		t := time.NewTicker(time.Second)
		defer t.Stop()
		for {
			select {
			case <-hbCtx.Done():
				return
			case <-t.C:
				_, _ = s.pool.Exec(hbCtx, `UPDATE imports SET bytes_read = $2, heartbeat_at = now() WHERE id = $1 AND status = 'running'`, rep.ID, cr.n.Load())
			}
		}
	}()
	err := s.importTx(ctx, a, cr, o, &rep)
	stopHB()
	<-hbDone
	rep.BytesRead = cr.n.Load()
	if err != nil {
		msg := err.Error()
		var fe *wear.FileError
		if errors.As(err, &fe) {
			msg = fe.Error()
			err = &cohort.PublicError{Message: "the file was refused and nothing was stored: " + msg, Kind: ErrImportRefused}
		} else if Unavailable(err) {
			err = mapErr("import", err) // a read-only, full or lost database: the caller answers 503
		}
		rep.Status, rep.Message = "failed", msg
		now := s.now()
		rep.FinishedAt = &now
		// The failure record survives even when the request was cancelled.
		_, _ = s.pool.Exec(context.WithoutCancel(ctx), `UPDATE imports SET status = 'failed', message = $2, finished_at = $3, bytes_read = $4 WHERE id = $1`,
			rep.ID, msg, now, rep.BytesRead)
		return rep, err
	}
	Work.imported(rep.Accepted, s.now().Sub(rep.StartedAt))
	return rep, nil
}

func (s *Store) importTx(ctx context.Context, a cohort.Actor, cr *countingReader, o ImportOptions, rep *ImportReport) error {
	lookup, err := s.participantLookup(ctx)
	if err != nil {
		return err
	}
	minBPM, maxBPM, err := s.plausibleBPM(ctx)
	if err != nil {
		return err
	}
	now := s.now()
	future := now.Add(5 * time.Minute).UnixMilli() // allow for clocks a little ahead

	var src wear.Source
	if o.Kind == ImportFHIRBundle {
		src = wear.NewFHIRReader(cr, o.FileName, wear.FHIROptions{})
	} else {
		src = wear.NewCSVReader(cr, o.FileName)
	}
	// Parse on a goroutine; two batches in flight overlap parsing with storing.
	pctx, cancel := context.WithCancel(ctx)
	defer cancel()
	batches := make(chan batch, 2)
	go func() {
		defer close(batches)
		for {
			rows, rejs, err := wear.ReadBatch(src, make([]wear.Row, 0, 16384), nil, 16384)
			b := batch{rows: rows, rejs: rejs}
			if err != nil && err != io.EOF {
				b.err = err
			}
			select {
			case batches <- b:
			case <-pctx.Done():
				return
			}
			if err != nil {
				return
			}
		}
	}()

	reasons := map[string]*ReasonCount{}
	var rejects [][]any
	seq := 0
	reject := func(code string, line int64, entry int, msg, raw string) {
		rc := reasons[code]
		if rc == nil {
			rc = &ReasonCount{Code: code, Label: ReasonLabel(code)}
			reasons[code] = rc
		}
		rc.Count++
		if len(rc.Examples) < maxExamples {
			rc.Examples = append(rc.Examples, Example{Line: line, Message: msg})
		}
		rep.Rejected++
		seq++
		var e any
		if entry >= 0 {
			e = int32(entry)
		}
		rejects = append(rejects, []any{rep.ID, int32(seq), line, e, code, msg, raw})
	}
	touched := map[int64]bool{}
	g := wear.NewGrouper(lookup, o.Budget)

	return s.inTx(ctx, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `SELECT pg_advisory_xact_lock(hashtext('cohortdesk.wear_import'))`); err != nil {
			return err
		}
		if _, err := tx.Exec(ctx, `CREATE TEMP TABLE wear_stage (LIKE wear_weeks INCLUDING DEFAULTS) ON COMMIT DROP`); err != nil {
			return err
		}
		writeRejects := func() error {
			if len(rejects) == 0 {
				return nil
			}
			_, err := tx.CopyFrom(ctx, pgx.Identifier{"import_rejects"}, []string{"import_id", "seq", "line", "entry", "reason", "message", "raw"}, pgx.CopyFromRows(rejects))
			rejects = rejects[:0]
			return err
		}
		flush := func() error {
			return s.flushGroups(ctx, tx, g, rep, touched)
		}
		for b := range batches {
			if b.err != nil {
				return b.err
			}
			for _, rj := range b.rejs {
				rep.Rows++
				reject(rj.Reason.String(), int64(rj.Line), rj.Entry, rj.Msg, rj.Raw)
			}
			for _, row := range b.rows {
				rep.Rows++
				if row.T > future {
					reject(reasonFuture, int64(row.Line), -1, fmt.Sprintf("time %s is after the import time", time.UnixMilli(row.T).UTC().Format(time.RFC3339)), wear.FormatRow(row))
					continue
				}
				if msg, ok := plausible(row, minBPM, maxBPM); !ok {
					reject(reasonImplausible, int64(row.Line), -1, msg, wear.FormatRow(row))
					continue
				}
				if rj := g.Add(row); rj != nil {
					reject(rj.Reason.String(), int64(row.Line), -1, rj.Msg, rj.Raw)
				}
			}
			if g.OverBudget() {
				if err := flush(); err != nil {
					return err
				}
			}
			if len(rejects) >= 10000 {
				if err := writeRejects(); err != nil {
					return err
				}
			}
		}
		if err := ctx.Err(); err != nil {
			return err
		}
		if err := src.Err(); err != nil {
			return err
		}
		if err := flush(); err != nil {
			return err
		}
		if err := writeRejects(); err != nil {
			return err
		}
		rep.SHA256 = fmt.Sprintf("%x", cr.h.Sum(nil))
		_ = tx.QueryRow(ctx, `SELECT id FROM imports WHERE kind = $1 AND file_sha256 = decode($2, 'hex') AND status = 'done' ORDER BY id LIMIT 1`, o.Kind, rep.SHA256).Scan(&rep.SameAs)
		for _, rc := range reasons {
			rep.Reasons = append(rep.Reasons, *rc)
		}
		sort.Slice(rep.Reasons, func(i, j int) bool { return rep.Reasons[i].Count > rep.Reasons[j].Count })
		reasonsJSON, _ := json.Marshal(rep.Reasons)
		fin := s.now()
		rep.FinishedAt, rep.Status = &fin, "done"
		rep.BytesRead = cr.n.Load()
		for id := range touched {
			rep.Participants = append(rep.Participants, id)
		}
		sort.Slice(rep.Participants, func(i, j int) bool { return rep.Participants[i] < rep.Participants[j] })
		// Screening of the changed participants is queued in the same
		// transaction: it exists exactly when the data does. Before any
		// protocol is stored there is nothing to screen with; activating the
		// first one offers to screen everyone.
		var haveProtocol bool
		if err := tx.QueryRow(ctx, `SELECT EXISTS (SELECT 1 FROM protocols WHERE active)`).Scan(&haveProtocol); err != nil {
			return err
		}
		if len(rep.Participants) > 0 && !o.NoScreening && haveProtocol {
			if _, err := enqueueScreen(ctx, tx, rep.Participants, 0); err != nil {
				return err
			}
		}
		if _, err := tx.Exec(ctx, `UPDATE imports SET status = 'done', file_sha256 = decode($2, 'hex'), rows_total = $3, accepted = $4,
			rejected = $5, duplicates = $6, reasons = $7, finished_at = $8, bytes_read = $9, size_bytes = greatest(size_bytes, $9),
			message = $10 WHERE id = $1`,
			rep.ID, rep.SHA256, rep.Rows, rep.Accepted, rep.Rejected, rep.Duplicates, reasonsJSON, fin, rep.BytesRead,
			conflictNote(rep.Conflicts)); err != nil {
			return err
		}
		return audit(ctx, tx, a, "import.readings", "import", strconv.FormatInt(rep.ID, 10), nil, map[string]any{
			"file": o.FileName, "kind": o.Kind, "sha256": rep.SHA256, "rows": rep.Rows, "accepted": rep.Accepted,
			"rejected": rep.Rejected, "duplicates": rep.Duplicates, "conflicts": rep.Conflicts, "participants": len(rep.Participants)})
	})
}

func conflictNote(n int64) string {
	if n == 0 {
		return ""
	}
	return fmt.Sprintf("%d readings share an instant with a different stored value; both were kept", n)
}

// plausible applies the active protocol's bounds at import, so implausible
// readings are quarantined with their line rather than stored.
func plausible(r wear.Row, minBPM, maxBPM int32) (string, bool) {
	switch r.Kind {
	case cohort.HeartRate:
		if r.V < minBPM || r.V > maxBPM {
			return fmt.Sprintf("heart rate %d bpm outside %d-%d", r.V, minBPM, maxBPM), false
		}
	case cohort.RRInterval:
		lo, hi := 60000/maxBPM, 60000/minBPM
		if r.V < lo || r.V > hi {
			return fmt.Sprintf("beat interval %d ms outside %d-%d (the protocol's %d-%d bpm)", r.V, lo, hi, minBPM, maxBPM), false
		}
	case cohort.Steps:
		// Over 250 steps a minute is beyond a sprint: a device fault.
		minutes := float64(r.End-r.T) / 60000
		if minutes > 0 && float64(r.V)/minutes > 250 {
			return fmt.Sprintf("%d steps in %.1f minutes is more than 250 a minute", r.V, minutes), false
		}
	}
	return "", true
}

// participantLookup maps study IDs to what grouping needs.
func (s *Store) participantLookup(ctx context.Context) (wear.Lookup, error) {
	rows, err := s.pool.Query(ctx, `SELECT id, study_id, enrolled_on, time_zone FROM participants`)
	if err != nil {
		return nil, mapErr("participant lookup", err)
	}
	defer rows.Close()
	m := map[string]wear.Participant{}
	locs := map[string]*time.Location{}
	for rows.Next() {
		var id int64
		var sid, tz string
		var enrolled time.Time
		if err := rows.Scan(&id, &sid, &enrolled, &tz); err != nil {
			return nil, mapErr("participant lookup", err)
		}
		loc, ok := locs[tz]
		if !ok {
			if loc, err = time.LoadLocation(tz); err != nil {
				loc = time.UTC
			}
			locs[tz] = loc
		}
		m[sid] = wear.Participant{ID: id, Enrolled: cohort.DateOf(enrolled), Loc: loc}
	}
	if err := rows.Err(); err != nil {
		return nil, mapErr("participant lookup", err)
	}
	return func(studyID string) (wear.Participant, bool) { p, ok := m[studyID]; return p, ok }, nil
}

// plausibleBPM is the active protocol's plausible heart-rate range, or the
// default protocol's before any protocol is stored.
func (s *Store) plausibleBPM(ctx context.Context) (int32, int32, error) {
	var p screen.Protocol
	pv, err := s.ActiveProtocol(ctx)
	switch {
	case errors.Is(err, cohort.ErrNotFound):
		p = screen.DefaultProtocol()
	case err != nil:
		return 0, 0, err
	default:
		p = pv.Params
	}
	if p.MinBPM <= 0 || p.MaxBPM <= p.MinBPM {
		d := screen.DefaultProtocol()
		return d.MinBPM, d.MaxBPM, nil
	}
	return p.MinBPM, p.MaxBPM, nil
}

// pendingGroup is a flushed series copied out of the grouper's reused memory.
type pendingGroup struct {
	key wear.GroupKey
	s   cohort.Samples
}

func copySamples(s cohort.Samples) cohort.Samples {
	out := cohort.Samples{T: append([]int64(nil), s.T...), V: append([]int32(nil), s.V...)}
	if s.End != nil {
		out.End = append([]int64(nil), s.End...)
	}
	return out
}

// flushGroups merges the grouper's series with what is stored and writes the
// changed weeks through a staging table: one query to read what exists, one
// COPY and one upsert per flush, whatever the number of weeks.
func (s *Store) flushGroups(ctx context.Context, tx pgx.Tx, g *wear.Grouper, rep *ImportReport, touched map[int64]bool) error {
	var pend []pendingGroup
	if err := g.Flush(func(gr wear.Group) error {
		pend = append(pend, pendingGroup{key: gr.Key, s: copySamples(gr.Samples)})
		return nil
	}); err != nil {
		return err
	}
	if len(pend) == 0 {
		return nil
	}
	pids := make([]int64, len(pend))
	weeks := make([]int16, len(pend))
	kinds := make([]int16, len(pend))
	for i, p := range pend {
		pids[i], weeks[i], kinds[i] = p.key.Participant, int16(p.key.Week), int16(p.key.Kind)
	}
	rows, err := tx.Query(ctx, `
		SELECT w.participant_id, w.week, w.kind, w.data
		FROM wear_weeks w JOIN unnest($1::bigint[], $2::smallint[], $3::smallint[]) AS k(p, wk, kd)
		  ON w.participant_id = k.p AND w.week = k.wk AND w.kind = k.kd`, pids, weeks, kinds)
	if err != nil {
		return err
	}
	existing := map[wear.GroupKey][]byte{}
	for rows.Next() {
		var pid int64
		var wk, kd int16
		var data []byte
		if err := rows.Scan(&pid, &wk, &kd, &data); err != nil {
			rows.Close()
			return err
		}
		existing[wear.GroupKey{Participant: pid, Week: int(wk), Kind: cohort.Kind(kd)}] = data
	}
	if err := rows.Err(); err != nil {
		return err
	}
	out := make([][]any, 0, len(pend))
	for _, p := range pend {
		merged := p.s
		var stats wear.MergeStats
		oldN := 0
		if data, ok := existing[p.key]; ok {
			old, err := wear.Decode(data)
			if err != nil {
				return fmt.Errorf("db: stored week of participant %d week %d kind %d is unreadable: %w", p.key.Participant, p.key.Week, p.key.Kind, err)
			}
			oldN = old.Len()
			merged, stats = wear.MergeWithStats(old, p.s)
		} else {
			merged, stats = wear.MergeWithStats(cohort.Samples{}, p.s)
		}
		rep.Duplicates += int64(stats.Duplicates)
		rep.Conflicts += int64(stats.Conflicts)
		added := merged.Len() - oldN
		rep.Accepted += int64(added)
		if added == 0 {
			continue // nothing new: leave the stored row untouched
		}
		touched[p.key.Participant] = true
		data := wear.Encode(merged, p.key.Kind)
		out = append(out, []any{p.key.Participant, int16(p.key.Week), int16(p.key.Kind), int32(merged.Len()),
			merged.T[0], lastTime(merged), data})
	}
	if len(out) == 0 {
		return nil
	}
	if _, err := tx.CopyFrom(ctx, pgx.Identifier{"wear_stage"}, []string{"participant_id", "week", "kind", "n", "first_ms", "last_ms", "data"},
		pgx.CopyFromRows(out)); err != nil {
		return err
	}
	if _, err := tx.Exec(ctx, `
		INSERT INTO wear_weeks (participant_id, week, kind, n, first_ms, last_ms, data, updated_at)
		SELECT participant_id, week, kind, n, first_ms, last_ms, data, now() FROM wear_stage
		ON CONFLICT (participant_id, week, kind) DO UPDATE SET n = EXCLUDED.n, first_ms = EXCLUDED.first_ms,
		  last_ms = EXCLUDED.last_ms, data = EXCLUDED.data, updated_at = now()`); err != nil {
		return err
	}
	_, err = tx.Exec(ctx, `TRUNCATE wear_stage`)
	return err
}

func lastTime(s cohort.Samples) int64 {
	last := s.T[len(s.T)-1]
	for _, e := range s.End {
		if e > last {
			last = e
		}
	}
	return last
}

package db

import (
	"context"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/rr"
	"cohortdesk/cohort/screen"

	"github.com/jackc/pgx/v5"
)

// OverRead is one entered reading of a recording.
type OverRead struct {
	ID int64
	overread.Reading
	Comment   string // free text: stays inside the system
	CreatedBy string // who entered it (the reader, or a loader)
	CreatedAt time.Time
}

// Recording is a stored recording with its readings and their effective
// verdict. The samples are read separately (RecordingWaveform).
type Recording struct {
	ID            int64
	CaseID        int64
	ParticipantID int64
	StudyID       string
	SiteCode      string
	CaseState     followup.State
	TakenAt       time.Time
	ReceivedAt    time.Time
	DurationS     float64
	Auto          overread.Auto
	// UsableS is the length the quality check left usable: the duration for
	// recordings without a waveform or stored before the check.
	UsableS float64
	// TooShort: under 30 s usable, not enough for a diagnostic read (2020
	// ESC AF guidelines). Readings may be entered, but none counts as a
	// diagnostic over-read: the case does not move on and the figures leave
	// it out.
	TooShort  bool
	Format    string // "", "edf", "edf+", "csv" or "samples"
	FileName  string // may identify someone; shown only to roles that see PHI
	SHA256    string // hex digest of the uploaded file
	RateHz    float64
	LeadLabel string
	Source    string
	Beats     []int // R-peak sample indices
	Hint      ecg.RecordingHint
	// Signals lists every signal of the uploaded file; nil for recordings
	// stored before signals were listed.
	Signals []ecg.SignalInfo
	// Lead is the index among Leads of the lead shown; -1 with one lead.
	Lead int
	// Leads are the file's ECG leads when it held several (Recording
	// fills them; lists leave them out).
	Leads      []RecordingLead
	CreatedBy  string
	CreatedAt  time.Time
	Readings   []OverRead
	Conclusion overread.Conclusion
	// Revisions are the readings amended or withdrawn, as they were, oldest
	// first (Recording fills them; lists leave them out).
	Revisions []OverReadRevision
	// NotNeeded is why the recording needs no over-read, "" when it is
	// wanted; who said so and when.
	NotNeeded   string
	NotNeededBy string
	NotNeededAt time.Time
}

// HasWaveform reports whether samples are stored.
func (r Recording) HasWaveform() bool { return r.Format != "" }

// Diagnostic applies overread's diagnostic-recording rule to this recording.
func (r Recording) Diagnostic() bool { return r.Conclusion.Diagnostic(r.TooShort) }

// readingsOf returns the readings of the given recordings, by recording.
func readingsOf(ctx context.Context, q querier, ids []int64) (map[int64][]OverRead, error) {
	out := map[int64][]OverRead{}
	if len(ids) == 0 {
		return out, nil
	}
	rows, err := q.Query(ctx, `
		SELECT id, recording_id, role, rhythm, confidence, coalesce(reader_id, 0), reader, read_on, comment, created_by, created_at
		FROM over_reads WHERE recording_id = ANY($1) ORDER BY recording_id, id`, ids)
	if err != nil {
		return nil, err
	}
	return scanReadings(rows)
}

// scanReadings collects over-reads (the columns readingsOf selects) by
// recording.
func scanReadings(rows pgx.Rows) (map[int64][]OverRead, error) {
	out := map[int64][]OverRead{}
	defer rows.Close()
	for rows.Next() {
		var o OverRead
		var rid int64
		var role, rhythm, conf string
		var on time.Time
		if err := rows.Scan(&o.ID, &rid, &role, &rhythm, &conf, &o.ReaderID, &o.Reader, &on, &o.Comment, &o.CreatedBy, &o.CreatedAt); err != nil {
			return nil, err
		}
		o.Role, o.Rhythm, o.Confidence, o.On = overread.Role(role), overread.Rhythm(rhythm), overread.Confidence(conf), cohort.DateOf(on)
		out[rid] = append(out[rid], o)
	}
	return out, rows.Err()
}

// querier is what reads need from a pool or a transaction.
type querier interface {
	Query(context.Context, string, ...any) (pgx.Rows, error)
	QueryRow(context.Context, string, ...any) pgx.Row
}

// conclusionOf resolves a recording's readings. Stored readings always passed
// overread.Check, so an error here means the table was edited by hand; it is
// reported rather than hidden.
func conclusionOf(id int64, os []OverRead) (overread.Conclusion, error) {
	rs := make([]overread.Reading, len(os))
	for i, o := range os {
		rs[i] = o.Reading
	}
	v, err := overread.Resolve(rs)
	if err != nil {
		return v, fmt.Errorf("db: recording %d: %w", id, err)
	}
	return v, nil
}

const recordingCols = `r.id, r.case_id, r.participant_id, p.study_id, st.code, c.state, r.taken_at, r.received_at, r.duration_s,
	r.auto_interpretation, r.too_short, r.waveform_format, r.file_name, coalesce(r.file_sha256, ''::bytea), coalesce(r.sampling_hz, 0),
	r.lead_label, r.source, r.beats, r.hint, r.created_by, r.created_at,
	coalesce(r.usable_s, r.duration_s), r.signals, coalesce(r.lead_index, -1),
	coalesce(r.read_not_needed_reason, ''), coalesce(r.read_not_needed_by, ''), r.read_not_needed_at`

const recordingFrom = `recordings r
	JOIN cases c ON c.id = r.case_id
	JOIN participants p ON p.id = r.participant_id
	JOIN sites st ON st.id = p.site_id`

func scanRecording(row pgx.Row) (Recording, error) {
	var r Recording
	var state, auto string
	var dur, rate float32
	var sum []byte
	var beats []int32
	var hint, signals []byte
	var usable float32
	var lead int16
	var notNeededAt *time.Time
	err := row.Scan(&r.ID, &r.CaseID, &r.ParticipantID, &r.StudyID, &r.SiteCode, &state, &r.TakenAt, &r.ReceivedAt, &dur,
		&auto, &r.TooShort, &r.Format, &r.FileName, &sum, &rate, &r.LeadLabel, &r.Source, &beats, &hint, &r.CreatedBy, &r.CreatedAt,
		&usable, &signals, &lead, &r.NotNeeded, &r.NotNeededBy, &notNeededAt)
	if err != nil {
		return r, err
	}
	r.NotNeededAt = timeOf(notNeededAt)
	r.CaseState, r.Auto = followup.State(state), overread.Auto(auto)
	r.DurationS, r.RateHz, r.UsableS, r.Lead = float64(dur), float64(rate), float64(usable), int(lead)
	if len(signals) > 0 {
		if err := json.Unmarshal(signals, &r.Signals); err != nil {
			return r, fmt.Errorf("db: recording %d signals: %w", r.ID, err)
		}
	}
	if len(sum) > 0 {
		r.SHA256 = hex.EncodeToString(sum)
	}
	r.Beats = make([]int, len(beats))
	for i, b := range beats {
		r.Beats[i] = int(b)
	}
	if len(hint) > 0 {
		if err := json.Unmarshal(hint, &r.Hint); err != nil {
			return r, fmt.Errorf("db: recording %d hint: %w", r.ID, err)
		}
	}
	return r, nil
}

// withReadings fills in the readings and verdicts of recordings.
func withReadings(ctx context.Context, q querier, recs []Recording) error {
	ids := make([]int64, len(recs))
	for i, r := range recs {
		ids[i] = r.ID
	}
	by, err := readingsOf(ctx, q, ids)
	if err != nil {
		return err
	}
	for i := range recs {
		recs[i].Readings = by[recs[i].ID]
		if recs[i].Conclusion, err = conclusionOf(recs[i].ID, recs[i].Readings); err != nil {
			return err
		}
	}
	return nil
}

// Recording returns one recording with its readings and verdict.
func (s *Store) Recording(ctx context.Context, id int64) (Recording, error) {
	r, err := scanRecording(s.reader(ctx).QueryRow(ctx, `SELECT `+recordingCols+` FROM `+recordingFrom+` WHERE r.id = $1`, id))
	if err != nil {
		return Recording{}, mapErr("recording", err)
	}
	recs := []Recording{r}
	if err := withReadings(ctx, s.pool, recs); err != nil {
		return Recording{}, mapErr("recording", err)
	}
	if recs[0].Lead >= 0 {
		if recs[0].Leads, err = leadsOf(ctx, s.pool, id); err != nil {
			return Recording{}, mapErr("recording", err)
		}
	}
	if recs[0].Revisions, err = revisionsOf(ctx, s.pool, id); err != nil {
		return Recording{}, mapErr("recording", err)
	}
	return recs[0], nil
}

// CaseRecordings lists a case's recordings, oldest first, with their readings
// and verdicts. Referral summaries take the confirming recording from here.
func (s *Store) CaseRecordings(ctx context.Context, caseID int64) ([]Recording, error) {
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+recordingCols+` FROM `+recordingFrom+` WHERE r.case_id = $1 ORDER BY r.taken_at, r.id`, caseID)
	if err != nil {
		return nil, mapErr("case recordings", err)
	}
	recs, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Recording, error) { return scanRecording(r) })
	if err != nil {
		return nil, mapErr("case recordings", err)
	}
	return recs, mapErr("case recordings", withReadings(ctx, s.pool, recs))
}

// RecordingWaveform returns a recording's stored samples (mV) with their rate
// and lead label; a recording without a waveform gives an empty Waveform.
func (s *Store) RecordingWaveform(ctx context.Context, id int64) (ecg.Waveform, error) {
	var b []byte
	var rate *float32
	var label string
	err := s.reader(ctx).QueryRow(ctx, `SELECT samples, sampling_hz, lead_label FROM recordings WHERE id = $1`, id).Scan(&b, &rate, &label)
	if err != nil {
		return ecg.Waveform{}, mapErr("recording waveform", err)
	}
	if rate == nil {
		return ecg.Waveform{}, nil
	}
	mv, err := DecodeSamples(b)
	if err != nil {
		return ecg.Waveform{}, err
	}
	return ecg.Waveform{Samples: mv, RateHz: float64(*rate), Label: label, Source: "stored recording " + strconv.FormatInt(id, 10)}, nil
}

// hintParams are the beat-interval parameters of the protocol that opened the
// case, so the hint speaks the screen's language; the published defaults when
// the protocol has none that are valid.
func hintParams(ctx context.Context, q querier, protocolID int) (rr.Params, error) {
	var raw []byte
	err := q.QueryRow(ctx, `SELECT params FROM protocols WHERE id = $1`, protocolID).Scan(&raw)
	if err != nil && !errors.Is(err, pgx.ErrNoRows) {
		return rr.Params{}, err
	}
	var p screen.Protocol
	if len(raw) > 0 && json.Unmarshal(raw, &p) == nil && p.RR.Params.Validate() == nil {
		return p.RRParams(), nil
	}
	return screen.DefaultProtocol().RRParams(), nil
}

// recordingAudit is a recording as the audit trail keeps it: no samples, no
// identification from the file.
type recordingAudit struct {
	CaseID     int64     `json:"case_id"`
	TakenAt    time.Time `json:"taken_at"`
	ReceivedAt time.Time `json:"received_at"`
	DurationS  float64   `json:"duration_s"`
	UsableS    float64   `json:"usable_s,omitempty"`
	Auto       string    `json:"auto_interpretation"`
	TooShort   bool      `json:"too_short"`
	Format     string    `json:"waveform_format,omitempty"`
	FileName   string    `json:"file_name,omitempty"`
	SHA256     string    `json:"file_sha256,omitempty"`
	RateHz     float64   `json:"sampling_hz,omitempty"`
	Beats      int       `json:"beats,omitempty"`
	Hint       string    `json:"hint,omitempty"`
	Lead       string    `json:"lead,omitempty"`
	Signals    int       `json:"signals,omitempty"`
	Leads      int       `json:"leads,omitempty"`
}

// AddRecording stores a recording for a case. Intake (ecg.Intake) is all or
// nothing: the file is read and checked (header, sampling rate 100-2000 Hz, at
// most 15 minutes), the quality check marks what is unusable, beats are
// detected and the beat-interval hint computed, and only then are the
// recording (with every ECG lead of a file that holds several), its audit
// event and the case's move from "recorder sent" to "recording received"
// written, in one transaction. A recording under 30 s usable is accepted and
// marked too short for a diagnostic read. A malformed file is refused with a
// message naming the field and byte offset (EDF) or line (CSV, WFDB header);
// the same file twice on one case is refused too.
//
// The case must be waiting for or holding recordings: "recorder sent",
// "recording received" or "over-read". Loaders call this with Samples and
// RateHz and the times of their own history.
func (s *Store) AddRecording(ctx context.Context, a cohort.Actor, caseID int64, in ecg.RecordingInput) (Recording, error) {
	c, err := s.Case(ctx, caseID)
	if err != nil {
		return Recording{}, err
	}
	st, err := s.StudySettings(ctx)
	if err != nil {
		return Recording{}, err
	}
	p, err := s.Participant(ctx, c.ParticipantID)
	if err != nil {
		return Recording{}, err
	}
	params, err := hintParams(ctx, s.pool, c.ProtocolID)
	if err != nil {
		return Recording{}, mapErr("add recording", err)
	}
	var ve cohort.ValidationError
	acc, err := ecg.Intake(in, ecg.IntakeOptions{Now: s.now(), StudyZone: st.Location(), RecorderZone: p.Location(),
		FlaggedAt: c.FlaggedAt, HintParams: params})
	if err != nil {
		var fe *cohort.ValidationError
		if !errors.As(err, &fe) {
			return Recording{}, err
		}
		for f, m := range fe.Fields {
			ve.Add(f, m)
		}
	}
	if msg := followup.TakesRecordings(c.State); msg != "" {
		ve.Add("case", msg)
	}
	if err := ve.Err(); err != nil {
		return Recording{}, err
	}

	rec := recordingAudit{CaseID: caseID, TakenAt: acc.TakenAt.UTC(), ReceivedAt: acc.ReceivedAt.UTC(), DurationS: acc.DurationS,
		Auto: string(acc.Auto), TooShort: acc.TooShort, FileName: acc.FileName}
	if acc.UsableS != acc.DurationS {
		rec.UsableS = acc.UsableS
	}
	var id int64
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		cur, err := lockCase(ctx, tx, caseID)
		if err != nil {
			return err
		}
		if msg := followup.TakesRecordings(cur.State); msg != "" { // changed since it was read
			return &cohort.ValidationError{Fields: map[string]string{"case": msg}}
		}
		var samples, sum []byte
		var rate *float64
		beats := []int32{}
		var hintJSON, signalsJSON []byte
		var usable *float64
		var leadIndex *int
		label, source := "", ""
		if sig := acc.Signal; sig != nil {
			usable = &acc.UsableS
			if sig.Signals != nil {
				if signalsJSON, err = json.Marshal(sig.Signals); err != nil {
					return err
				}
			}
			if len(sig.Leads) > 0 {
				leadIndex = &sig.Lead
			}
			rec.Lead, rec.Signals, rec.Leads = sig.Waveform.Label, len(sig.Signals), len(sig.Leads)
			samples = EncodeSamples(sig.Waveform.Samples)
			rate = &sig.Waveform.RateHz
			label, source = truncate(sig.Waveform.Label, 80), truncate(sig.Waveform.Source, 500)
			if sum = sig.FileSHA256; sum != nil {
				var other int64
				err := tx.QueryRow(ctx, `SELECT id FROM recordings WHERE case_id = $1 AND file_sha256 = $2`, caseID, sum).Scan(&other)
				if err == nil {
					return &cohort.ValidationError{Fields: map[string]string{"waveform": fmt.Sprintf("this file is already stored as recording %d of this case; nothing was added", other)}}
				}
				if !errors.Is(err, pgx.ErrNoRows) {
					return err
				}
				rec.SHA256 = hex.EncodeToString(sum)
			}
			if hintJSON, err = json.Marshal(sig.Hint); err != nil {
				return err
			}
			for _, b := range sig.Beats {
				beats = append(beats, int32(b))
			}
			rec.Format, rec.RateHz, rec.Beats, rec.Hint = sig.Format, sig.Waveform.RateHz, len(beats), sig.Hint.Text
		}
		var actorID *int64
		if a.UserID != 0 {
			actorID = &a.UserID
		}
		err = tx.QueryRow(ctx, `
			INSERT INTO recordings (case_id, participant_id, taken_at, received_at, duration_s, auto_interpretation, too_short,
			  waveform_format, file_name, file_sha256, sampling_hz, lead_label, source, samples, beats, hint, created_by_id, created_by,
			  usable_s, signals, lead_index)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17, $18, $19, $20, $21) RETURNING id`,
			caseID, cur.ParticipantID, acc.TakenAt, acc.ReceivedAt, acc.DurationS, string(acc.Auto), acc.TooShort, rec.Format, acc.FileName, sum, rate,
			label, source, samples, beats, hintJSON, actorID, a.Label(), usable, signalsJSON, leadIndex).Scan(&id)
		if err != nil {
			return err
		}
		if sig := acc.Signal; sig != nil && len(sig.Leads) > 0 {
			if err := insertLeads(ctx, tx, id, sig); err != nil {
				return err
			}
		}
		if err := audit(ctx, tx, a, "recording.add", "recording", strconv.FormatInt(id, 10), nil, rec); err != nil {
			return err
		}
		if next, ok := followup.AfterRecording(cur.State); ok {
			if _, err := s.advanceCase(ctx, tx, a, caseID, next, acc.ReceivedAt, ""); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return Recording{}, mapCaseErr("add recording", err)
	}
	return s.Recording(ctx, id)
}

func truncate(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return strings.ToValidUTF8(s[:n], "")
}

package db

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
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

// Limits of recording intake (ours): a handheld recorder takes 30 s to a few
// minutes, so a file beyond these is not what the study collects, and the
// bounds keep one upload from filling the database.
const (
	MaxRecordingFileBytes = 32 << 20
	MaxRecordingSeconds   = 15 * 60
	maxCommentChars       = 2000
	// recordingSkew is how far in the future a recording time may lie: clocks
	// of recorders and staff computers drift a little.
	recordingSkew = 5 * time.Minute
)

// RecordingInput is a handheld ECG recording as intake receives it: from the
// coordinators' form, or from a loader that has samples in hand. Give either
// File or Samples, or neither (a recording known only by its metadata).
type RecordingInput struct {
	// TakenAt is when the participant made the recording. Zero takes the
	// waveform's own start time, when the file gives one.
	TakenAt time.Time
	// ReceivedAt is when the recording reached the study; zero is now.
	ReceivedAt time.Time
	// DurationS is the length in seconds of a recording without a waveform;
	// with a waveform, the waveform's own length is used and this is ignored.
	DurationS float64
	// Auto is the recorder's own interpretation (overread.Auto value); "" is none.
	Auto string
	// File is an uploaded EDF, EDF+ or CSV waveform (cohort/ecg formats),
	// recognised by its content. Its patient and recording identification
	// fields are never stored.
	File     []byte
	FileName string
	// CSVRateHz is the sampling rate of a CSV file that does not state one.
	CSVRateHz float64
	// Samples (mV) at RateHz, for loaders that synthesise or convert a
	// waveform themselves.
	Samples []float64
	RateHz  float64
}

// RecordingHint is the beat analysis stored with a recording: what the
// over-reader sees beside the strip. It is a hint, never a verdict.
type RecordingHint struct {
	Text       string     `json:"text"`
	Summary    rr.Summary `json:"summary"`
	Params     rr.Params  `json:"params"`
	Beats      int        `json:"beats"`
	MeanHR     float64    `json:"mean_hr"`
	SearchBack int        `json:"search_back"`
	Warnings   []string   `json:"warnings,omitempty"`
}

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
	// TooShort: under 30 s, not enough for a diagnostic read (2020 ESC AF
	// guidelines). Readings may be entered, but none counts as a diagnostic
	// over-read: the case does not move on and the figures leave it out.
	TooShort  bool
	Format    string // "", "edf", "edf+", "csv" or "samples"
	FileName  string // may identify someone; shown only to roles that see PHI
	SHA256    string // hex digest of the uploaded file
	RateHz    float64
	LeadLabel string
	Source    string
	Beats     []int // R-peak sample indices
	Hint      RecordingHint
	CreatedBy string
	CreatedAt time.Time
	Readings  []OverRead
	Conclusion overread.Conclusion
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

// verdictOf resolves a recording's readings. Stored readings always passed
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
	r.lead_label, r.source, r.beats, r.hint, r.created_by, r.created_at`

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
	var hint []byte
	err := row.Scan(&r.ID, &r.CaseID, &r.ParticipantID, &r.StudyID, &r.SiteCode, &state, &r.TakenAt, &r.ReceivedAt, &dur,
		&auto, &r.TooShort, &r.Format, &r.FileName, &sum, &rate, &r.LeadLabel, &r.Source, &beats, &hint, &r.CreatedBy, &r.CreatedAt)
	if err != nil {
		return r, err
	}
	r.CaseState, r.Auto = followup.State(state), overread.Auto(auto)
	r.DurationS, r.RateHz = float64(dur), float64(rate)
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
	r, err := scanRecording(s.pool.QueryRow(ctx, `SELECT `+recordingCols+` FROM `+recordingFrom+` WHERE r.id = $1`, id))
	if err != nil {
		return Recording{}, mapErr("recording", err)
	}
	recs := []Recording{r}
	if err := withReadings(ctx, s.pool, recs); err != nil {
		return Recording{}, mapErr("recording", err)
	}
	return recs[0], nil
}

// CaseRecordings lists a case's recordings, oldest first, with their readings
// and verdicts. Referral summaries take the confirming recording from here.
func (s *Store) CaseRecordings(ctx context.Context, caseID int64) ([]Recording, error) {
	rows, err := s.pool.Query(ctx, `SELECT `+recordingCols+` FROM `+recordingFrom+` WHERE r.case_id = $1 ORDER BY r.taken_at, r.id`, caseID)
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
	err := s.pool.QueryRow(ctx, `SELECT samples, sampling_hz, lead_label FROM recordings WHERE id = $1`, id).Scan(&b, &rate, &label)
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

// decoded is a waveform read from intake input, checked and analysed.
type decoded struct {
	w        ecg.Waveform
	format   string
	det      ecg.Detection
	warnings []string
}

// isEDF recognises an EDF or EDF+ file by its version field: "0" and seven
// spaces (EDF specification, header byte 0).
func isEDF(b []byte) bool { return len(b) >= 8 && string(b[:8]) == "0       " }

// decodeWaveform reads, checks and analyses the waveform of in, if any. The
// samples are quantised as they will be stored before beats are detected, so
// detection on the stored recording gives the same beats. A file that breaks
// its format, or a recording that cannot be analysed, is a
// *cohort.ValidationError on the field "waveform" saying what and where.
func decodeWaveform(in RecordingInput, loc *time.Location) (*decoded, error) {
	var d decoded
	refuse := func(msg string) error {
		return &cohort.ValidationError{Fields: map[string]string{"waveform": msg + " Nothing was stored."}}
	}
	switch {
	case len(in.File) > 0 && len(in.Samples) > 0:
		return nil, refuse("give either a file or samples, not both.")
	case len(in.File) > MaxRecordingFileBytes:
		return nil, refuse(fmt.Sprintf("the file is larger than %d MiB, more than any handheld recording.", MaxRecordingFileBytes>>20))
	case len(in.File) > 0 && isEDF(in.File):
		f, err := ecg.ReadEDF(in.File, ecg.EDFOptions{Location: loc})
		if err != nil {
			return nil, refuse("the file is not usable EDF: " + strings.TrimPrefix(err.Error(), "ecg: edf: ") + ".")
		}
		// f.Identity (patient and recording identification) is PHI and is
		// dropped here, never stored nor shown.
		d.w, d.warnings = f.Waveform, f.Header.Warnings
		d.format = "edf"
		if strings.HasPrefix(f.Header.Variant, "EDF+") {
			d.format = "edf+"
		}
	case len(in.File) > 0:
		w, err := ecg.ReadCSV(in.File, ecg.CSVOptions{RateHz: in.CSVRateHz})
		if err != nil {
			return nil, refuse("the file is neither EDF nor a usable waveform CSV: " + strings.TrimPrefix(err.Error(), "ecg: csv: ") + ".")
		}
		d.w, d.format = w, "csv"
	case len(in.Samples) > 0:
		d.w = ecg.Waveform{Samples: in.Samples, RateHz: in.RateHz, Source: fmt.Sprintf("samples given directly, %g Hz, mV", in.RateHz)}
		d.format = "samples"
	default:
		return nil, nil
	}
	if _, err := ecg.CheckRecording(d.w); err != nil {
		return nil, refuse("the recording cannot be analysed: " + strings.TrimPrefix(err.Error(), "ecg: ") + ".")
	}
	if d.w.Seconds() > MaxRecordingSeconds {
		return nil, refuse(fmt.Sprintf("the recording lasts %.0f s, longer than the %d s a handheld recording can take here.", d.w.Seconds(), MaxRecordingSeconds))
	}
	stored, err := DecodeSamples(EncodeSamples(d.w.Samples))
	if err != nil {
		return nil, err
	}
	d.w.Samples = stored
	if d.det, err = ecg.Detect(d.w); err != nil {
		return nil, refuse("beat detection failed: " + strings.TrimPrefix(err.Error(), "ecg: ") + ".")
	}
	return &d, nil
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
		return p.RR.Params, nil
	}
	return rr.DefaultParams(), nil
}

// roundSeconds keeps durations to the millisecond, so the stored real and the
// 30 s rule agree exactly.
func roundSeconds(s float64) float64 { return math.Round(s*1000) / 1000 }

// recordingAudit is a recording as the audit trail keeps it: no samples, no
// identification from the file.
type recordingAudit struct {
	CaseID     int64     `json:"case_id"`
	TakenAt    time.Time `json:"taken_at"`
	ReceivedAt time.Time `json:"received_at"`
	DurationS  float64   `json:"duration_s"`
	Auto       string    `json:"auto_interpretation"`
	TooShort   bool      `json:"too_short"`
	Format     string    `json:"waveform_format,omitempty"`
	FileName   string    `json:"file_name,omitempty"`
	SHA256     string    `json:"file_sha256,omitempty"`
	RateHz     float64   `json:"sampling_hz,omitempty"`
	Beats      int       `json:"beats,omitempty"`
	Hint       string    `json:"hint,omitempty"`
}

// AddRecording stores a recording for a case. Intake is all or nothing: the
// file is read and checked (header, sampling rate 100-2000 Hz, at most 15
// minutes), beats are detected and the beat-interval hint computed, and only
// then are the recording, its audit event and the case's move from "recorder
// sent" to "recording received" written, in one transaction. A recording
// under 30 s is accepted and marked too short for a diagnostic read. A
// malformed file is refused with a message naming the field and byte offset
// (EDF) or line (CSV); the same file twice on one case is refused too.
//
// The case must be waiting for or holding recordings: "recorder sent",
// "recording received" or "over-read". Loaders call this with Samples and
// RateHz and the times of their own history.
func (s *Store) AddRecording(ctx context.Context, a cohort.Actor, caseID int64, in RecordingInput) (Recording, error) {
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
	var ve cohort.ValidationError
	auto, err := overread.ParseAuto(in.Auto)
	if err != nil {
		ve.Add("auto", "choose one of the listed interpretations")
	}
	in.FileName = strings.TrimSpace(in.FileName)
	if len(in.FileName) > 255 {
		in.FileName = in.FileName[:255]
	}
	d, err := decodeWaveform(in, p.Location())
	if err != nil {
		var fe *cohort.ValidationError
		if !errors.As(err, &fe) {
			return Recording{}, err
		}
		for f, m := range fe.Fields {
			ve.Add(f, m)
		}
	}
	now := s.now()
	loc := st.Location()
	taken := in.TakenAt
	if taken.IsZero() && d != nil {
		taken = d.w.Start
	}
	switch {
	case taken.IsZero():
		ve.Add("taken_at", "enter when the recording was taken (the file does not say)")
	case taken.After(now.Add(recordingSkew)):
		ve.Add("taken_at", "the recording time is in the future")
	case cohort.DateOf(taken.In(loc)).Before(cohort.DateOf(c.FlaggedAt.In(loc))):
		ve.Add("taken_at", "the recording was taken before the case was flagged ("+cohort.DateOf(c.FlaggedAt.In(loc)).String()+")")
	}
	received := in.ReceivedAt
	if received.IsZero() {
		received = now
	}
	switch {
	case received.After(now.Add(recordingSkew)):
		ve.Add("received_on", "the day of arrival is in the future")
	case !taken.IsZero() && cohort.DateOf(received.In(loc)).Before(cohort.DateOf(taken.In(loc))):
		ve.Add("received_on", "the recording arrived before it was taken")
	case received.Before(taken):
		received = taken // same day, earlier hour: keep the order of events
	}
	dur := roundSeconds(in.DurationS)
	if d != nil {
		dur = roundSeconds(d.w.Seconds())
	} else if !(dur > 0 && dur <= MaxRecordingSeconds) {
		ve.Add("duration_s", fmt.Sprintf("enter the duration in seconds (more than 0, at most %d), or upload the waveform", MaxRecordingSeconds))
	}
	if msg := followup.TakesRecordings(c.State); msg != "" {
		ve.Add("case", msg)
	}
	if err := ve.Err(); err != nil {
		return Recording{}, err
	}

	rec := recordingAudit{CaseID: caseID, TakenAt: taken.UTC(), ReceivedAt: received.UTC(), DurationS: dur, Auto: string(auto),
		TooShort: dur < ecg.MinDiagnosticSeconds, FileName: in.FileName}
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
		var hintJSON []byte
		label, source := "", ""
		if d != nil {
			samples = EncodeSamples(d.w.Samples)
			rate = &d.w.RateHz
			label, source = truncate(d.w.Label, 80), truncate(d.w.Source, 500)
			if len(in.File) > 0 {
				h := sha256.Sum256(in.File)
				sum = h[:]
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
			params, err := hintParams(ctx, tx, cur.ProtocolID)
			if err != nil {
				return err
			}
			h := RecordingHint{Text: ecg.HintText(d.det.RRms, params), Summary: ecg.Hint(d.det.RRms, params), Params: params,
				Beats: len(d.det.Beats), MeanHR: d.det.MeanHR, SearchBack: d.det.SearchBack, Warnings: d.warnings}
			if hintJSON, err = json.Marshal(h); err != nil {
				return err
			}
			for _, b := range d.det.Beats {
				beats = append(beats, int32(b))
			}
			rec.Format, rec.RateHz, rec.Beats, rec.Hint = d.format, d.w.RateHz, len(beats), h.Text
		}
		var actorID *int64
		if a.UserID != 0 {
			actorID = &a.UserID
		}
		err = tx.QueryRow(ctx, `
			INSERT INTO recordings (case_id, participant_id, taken_at, received_at, duration_s, auto_interpretation, too_short,
			  waveform_format, file_name, file_sha256, sampling_hz, lead_label, source, samples, beats, hint, created_by_id, created_by)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17, $18) RETURNING id`,
			caseID, cur.ParticipantID, taken, received, dur, string(auto), rec.TooShort, rec.Format, in.FileName, sum, rate,
			label, source, samples, beats, hintJSON, actorID, a.Label()).Scan(&id)
		if err != nil {
			return err
		}
		if err := audit(ctx, tx, a, "recording.add", "recording", strconv.FormatInt(id, 10), nil, rec); err != nil {
			return err
		}
		if cur.State == followup.RecorderSent {
			if _, err := s.advanceCase(ctx, tx, a, caseID, followup.RecordingReceived, received, ""); err != nil {
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

// OverReadInput is a reading as the form, or a loader, gives it.
type OverReadInput struct {
	// Role is the reading's place: "first", "second" or "adjudication". The
	// form names the one it offered, so two people entering at once cannot
	// both be first; "" takes whichever is due (for loaders).
	Role       string
	Rhythm     string // overread.Rhythm value
	Confidence string // overread.Confidence value
	Comment    string // free text, at most 2000 characters; stays inside the system
	// ReaderID is the reading investigator's account: the signed-in
	// investigator on the form, any active investigator for a loader.
	ReaderID int64
	// ReadOn is the day of the reading; zero is today in the study's zone.
	ReadOn cohort.Date
}

// readingAudit is a reading as the audit trail keeps it.
type readingAudit struct {
	ID         int64  `json:"id"`
	CaseID     int64  `json:"case_id"`
	Role       string `json:"role"`
	Rhythm     string `json:"rhythm"`
	Confidence string `json:"confidence"`
	Comment    string `json:"comment,omitempty"`
	ReaderID   int64  `json:"reader_id"`
	Reader     string `json:"reader"`
	ReadOn     string `json:"read_on"`
	Verdict    string `json:"verdict"`
}

// AddOverRead enters a reading of a recording: the first, an optional second
// by another investigator, or the adjudication when the two disagree (rules in
// overread.Check). The reader must be an active investigator. The reading, its
// audit event and, when the readings now settle an interpretable rhythm on a
// recording of diagnostic length, the case's move from "recording received" to
// "over-read" are written in one transaction. An uninterpretable verdict, a
// disagreement, or a recording under 30 s leave the case where it is.
func (s *Store) AddOverRead(ctx context.Context, a cohort.Actor, recordingID int64, in OverReadInput) (Recording, error) {
	st, err := s.StudySettings(ctx)
	if err != nil {
		return Recording{}, err
	}
	loc := st.Location()
	now := s.now()
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		var caseID, pid int64
		var taken time.Time
		var tooShort bool
		err := tx.QueryRow(ctx, `SELECT case_id, participant_id, taken_at, too_short FROM recordings WHERE id = $1 FOR UPDATE`, recordingID).
			Scan(&caseID, &pid, &taken, &tooShort)
		if err != nil {
			return err
		}
		have, err := readingsOf(ctx, tx, []int64{recordingID})
		if err != nil {
			return err
		}
		existing := make([]overread.Reading, len(have[recordingID]))
		for i, o := range have[recordingID] {
			existing[i] = o.Reading
		}
		var ve cohort.ValidationError
		next := overread.Reading{Role: overread.Role(strings.TrimSpace(in.Role))}
		if next.Role == "" {
			next.Role = overread.Next(existing)
		}
		if next.Rhythm, err = overread.ParseRhythm(in.Rhythm); err != nil {
			ve.Add("rhythm", "choose the rhythm you see")
		}
		if next.Confidence, err = overread.ParseConfidence(in.Confidence); err != nil {
			ve.Add("confidence", "choose how sure you are")
		}
		comment := strings.TrimSpace(in.Comment)
		if len(comment) > maxCommentChars {
			ve.Add("comment", fmt.Sprintf("use at most %d characters", maxCommentChars))
		}
		reader, err := s.investigator(ctx, tx, in.ReaderID)
		if err != nil {
			return err
		}
		if reader.ID == 0 {
			ve.Add("reader", "over-reads are entered by an active investigator")
		}
		next.ReaderID, next.Reader = reader.ID, reader.Name
		next.On = in.ReadOn
		today := cohort.DateOf(now.In(loc))
		switch {
		case next.On.IsZero():
			next.On = today
		case today.Before(next.On):
			ve.Add("read_on", "the date is in the future")
		case next.On.Before(cohort.DateOf(taken.In(loc))):
			ve.Add("read_on", "the date is before the recording was taken ("+cohort.DateOf(taken.In(loc)).String()+")")
		}
		if next.Rhythm.Valid() {
			if err := overread.Check(existing, next); err != nil {
				var ce *cohort.ValidationError
				if !errors.As(err, &ce) {
					return err
				}
				for f, m := range ce.Fields {
					ve.Add(f, m)
				}
			}
		}
		if err := ve.Err(); err != nil {
			return err
		}
		var id int64
		err = tx.QueryRow(ctx, `
			INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, confidence, comment, reader_id, reader, read_on, created_by)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11) RETURNING id`,
			recordingID, caseID, pid, string(next.Role), string(next.Rhythm), string(next.Confidence), comment, reader.ID, reader.Name,
			next.On.String(), a.Label()).Scan(&id)
		if err != nil {
			return err
		}
		v, err := overread.Resolve(append(existing, next))
		if err != nil {
			return err
		}
		rec := readingAudit{ID: id, CaseID: caseID, Role: string(next.Role), Rhythm: string(next.Rhythm), Confidence: string(next.Confidence),
			Comment: comment, ReaderID: reader.ID, Reader: reader.Name, ReadOn: next.On.String(), Verdict: string(v.Status)}
		if err := audit(ctx, tx, a, "over_read.add", "recording", strconv.FormatInt(recordingID, 10), nil, rec); err != nil {
			return err
		}
		if !v.Final || !v.Rhythm.Interpretable() || tooShort {
			return nil
		}
		c, err := lockCase(ctx, tx, caseID)
		if err != nil {
			return err
		}
		if c.State == followup.RecordingReceived {
			_, err = s.advanceCase(ctx, tx, a, caseID, followup.OverRead, followup.StepTime(v.SettledOn, now, loc), "")
		}
		return err
	})
	if err != nil {
		return Recording{}, mapCaseErr("add over-read", err)
	}
	return s.Recording(ctx, recordingID)
}

// investigator reads an active investigator's account; a zero User when the
// id names nobody of that kind.
func (s *Store) investigator(ctx context.Context, tx pgx.Tx, id int64) (User, error) {
	if id <= 0 {
		return User{}, nil
	}
	rows, err := tx.Query(ctx, `SELECT `+userCols+` FROM users WHERE id = $1`, id)
	if err != nil {
		return User{}, err
	}
	u, err := pgx.CollectExactlyOneRow(rows, scanUser)
	if errors.Is(err, pgx.ErrNoRows) || (err == nil && (!u.Active || u.Role != cohort.Investigator)) {
		return User{}, nil
	}
	return u, err
}

// Investigators lists the active investigators by name, for loaders that
// pick a reader and for the recording page.
func (s *Store) Investigators(ctx context.Context) ([]User, error) {
	rows, err := s.pool.Query(ctx, `SELECT `+userCols+` FROM users WHERE active AND role = 'investigator' ORDER BY display_name, id`)
	if err != nil {
		return nil, mapErr("investigators", err)
	}
	out, err := pgx.CollectRows(rows, scanUser)
	return out, mapErr("investigators", err)
}

// QueueRecording is a recording on the confirmations page.
type QueueRecording struct {
	ID         int64
	CaseID     int64
	StudyID    string
	SiteCode   string
	TakenAt    time.Time
	ReceivedAt time.Time
	DurationS  float64
	TooShort   bool
	Auto       overread.Auto
	Readings   []OverRead // the first and second readings of a disagreement
}

// RecentOverRead is an entered reading on the confirmations page.
type RecentOverRead struct {
	OverRead
	RecordingID int64
	CaseID      int64
	StudyID     string
	SiteCode    string
	TooShort    bool
}

// Confirmations are the over-read work lists: recordings without any
// reading (oldest arrival first), disagreements waiting for adjudication
// (oldest first), and the latest readings entered (newest first).
type Confirmations struct {
	Unread    []QueueRecording
	Disagreed []QueueRecording
	Recent    []RecentOverRead
}

// Confirmations reads the work lists, at most limit rows each.
func (s *Store) Confirmations(ctx context.Context, limit int) (Confirmations, error) {
	if limit <= 0 || limit > 1000 {
		limit = 100
	}
	var out Confirmations
	err := pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly, IsoLevel: pgx.RepeatableRead}, func(tx pgx.Tx) error {
		scan := func(r pgx.CollectableRow) (QueueRecording, error) {
			var q QueueRecording
			var dur float32
			var auto string
			err := r.Scan(&q.ID, &q.CaseID, &q.StudyID, &q.SiteCode, &q.TakenAt, &q.ReceivedAt, &dur, &q.TooShort, &auto)
			q.DurationS, q.Auto = float64(dur), overread.Auto(auto)
			return q, err
		}
		const cols = `r.id, r.case_id, p.study_id, st.code, r.taken_at, r.received_at, r.duration_s, r.too_short, r.auto_interpretation`
		rows, err := tx.Query(ctx, `SELECT `+cols+` FROM `+recordingFrom+`
			WHERE NOT EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id)
			ORDER BY r.received_at, r.id LIMIT $1`, limit)
		if err != nil {
			return err
		}
		if out.Unread, err = pgx.CollectRows(rows, scan); err != nil {
			return err
		}
		// Candidates: a second reading and no adjudication. Whether they
		// disagree is overread's rule, applied below.
		rows, err = tx.Query(ctx, `SELECT `+cols+` FROM `+recordingFrom+`
			WHERE EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id AND o.role = 'second')
			  AND NOT EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id AND o.role = 'adjudication')
			ORDER BY r.received_at, r.id`)
		if err != nil {
			return err
		}
		cands, err := pgx.CollectRows(rows, scan)
		if err != nil {
			return err
		}
		ids := make([]int64, len(cands))
		for i, c := range cands {
			ids[i] = c.ID
		}
		by, err := readingsOf(ctx, tx, ids)
		if err != nil {
			return err
		}
		for _, c := range cands {
			v, err := conclusionOf(c.ID, by[c.ID])
			if err != nil {
				return err
			}
			if v.Status == overread.Disagreed && len(out.Disagreed) < limit {
				c.Readings = by[c.ID]
				out.Disagreed = append(out.Disagreed, c)
			}
		}
		rows, err = tx.Query(ctx, `
			SELECT o.id, o.role, o.rhythm, o.confidence, coalesce(o.reader_id, 0), o.reader, o.read_on, o.comment, o.created_by, o.created_at,
			       r.id, r.case_id, p.study_id, st.code, r.too_short
			FROM over_reads o JOIN recordings r ON r.id = o.recording_id
			  JOIN participants p ON p.id = r.participant_id JOIN sites st ON st.id = p.site_id
			ORDER BY o.created_at DESC, o.id DESC LIMIT $1`, limit)
		if err != nil {
			return err
		}
		out.Recent, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (RecentOverRead, error) {
			var o RecentOverRead
			var role, rhythm, conf string
			var on time.Time
			err := r.Scan(&o.ID, &role, &rhythm, &conf, &o.ReaderID, &o.Reader, &on, &o.Comment, &o.CreatedBy, &o.CreatedAt,
				&o.RecordingID, &o.CaseID, &o.StudyID, &o.SiteCode, &o.TooShort)
			o.Role, o.Rhythm, o.Confidence, o.On = overread.Role(role), overread.Rhythm(rhythm), overread.Confidence(conf), cohort.DateOf(on)
			return o, err
		})
		return err
	})
	return out, mapErr("confirmations", err)
}

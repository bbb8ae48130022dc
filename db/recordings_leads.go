package db

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"

	"cohortdesk/cohort"
	"cohortdesk/cohort/ecg"

	"github.com/jackc/pgx/v5"
)

// RecordingLead is one ECG lead of a recording whose file held several, as
// the recording page lists them (the samples stay in the table).
type RecordingLead struct {
	Index   int    // lead_index
	Signal  int    // the signal's number in the file
	Label   string // the lead's label in the file
	RateHz  float64
	UsableS float64
	Beats   int
	Pattern ecg.HintPattern
}

// leadsOf lists the leads of one recording in lead order.
func leadsOf(ctx context.Context, q querier, recordingID int64) ([]RecordingLead, error) {
	rows, err := q.Query(ctx, `
		SELECT lead_index, signal_number, lead_label, sampling_hz, usable_s, cardinality(beats), coalesce(hint->>'pattern', '')
		FROM recording_leads WHERE recording_id = $1 ORDER BY lead_index`, recordingID)
	if err != nil {
		return nil, err
	}
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (RecordingLead, error) {
		var l RecordingLead
		var rate, usable float32
		var pattern string
		err := r.Scan(&l.Index, &l.Signal, &l.Label, &rate, &usable, &l.Beats, &pattern)
		l.RateHz, l.UsableS, l.Pattern = float64(rate), float64(usable), ecg.HintPattern(pattern)
		return l, err
	})
}

// insertLeads stores every analysed lead of a recording's file.
func insertLeads(ctx context.Context, tx pgx.Tx, recordingID int64, sig *ecg.Signal) error {
	for i, l := range sig.Leads {
		hint, err := json.Marshal(l.Hint)
		if err != nil {
			return err
		}
		signal := max(l.Signal, 1)
		_, err = tx.Exec(ctx, `
			INSERT INTO recording_leads (participant_id, recording_id, lead_index, signal_number, lead_label, source, sampling_hz, samples, beats, hint, usable_s)
			SELECT r.participant_id, $1, $2, $3, $4, $5, $6, $7, $8, $9, $10 FROM recordings r WHERE r.id = $1`,
			recordingID, i, signal, truncate(l.Waveform.Label, 80), truncate(l.Waveform.Source, 500), l.Waveform.RateHz,
			EncodeSamples(l.Waveform.Samples), beatsOf(l.Beats), hint, l.UsableSeconds())
		if err != nil {
			return err
		}
	}
	return nil
}

func beatsOf(b []int) []int32 {
	out := make([]int32, len(b))
	for i, v := range b {
		out[i] = int32(v)
	}
	return out
}

// leadChange is a change of lead as the audit trail keeps it.
type leadChange struct {
	Lead     string  `json:"lead"`
	Index    int     `json:"lead_index"`
	UsableS  float64 `json:"usable_s"`
	TooShort bool    `json:"too_short"`
	Beats    int     `json:"beats"`
}

// ChooseRecordingLead makes another of a recording's ECG leads the one shown
// and scored: its samples, beats, hint and usable length replace the
// recording's, and whether the recording is too short for a diagnostic read
// follows the new lead's usable length. The choice is stored and audited
// (action recording.lead). It is refused once a reading has been entered,
// since the reading was made on the lead shown then.
func (s *Store) ChooseRecordingLead(ctx context.Context, a cohort.Actor, recordingID int64, lead int) (Recording, error) {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var cur *int16
		var old leadChange
		var usable float32
		err := tx.QueryRow(ctx, `SELECT lead_index, lead_label, coalesce(usable_s, duration_s), too_short, cardinality(beats)
			FROM recordings WHERE id = $1 FOR UPDATE`, recordingID).Scan(&cur, &old.Lead, &usable, &old.TooShort, &old.Beats)
		if err != nil {
			return err
		}
		old.UsableS = float64(usable)
		refuse := func(msg string) error { return &cohort.ValidationError{Fields: map[string]string{"lead": msg}} }
		if cur == nil {
			return refuse("this recording's file holds one ECG lead; there is no other to show")
		}
		old.Index = int(*cur)
		if old.Index == lead {
			return nil
		}
		var readings int
		if err := tx.QueryRow(ctx, `SELECT count(*) FROM over_reads WHERE recording_id = $1`, recordingID).Scan(&readings); err != nil {
			return err
		}
		if readings > 0 {
			return refuse(fmt.Sprintf("the lead can no longer change: a reading was entered on lead %q", old.Lead))
		}
		var nu leadChange
		var rate float32
		var samples, hint []byte
		var beats []int32
		var source string
		err = tx.QueryRow(ctx, `SELECT lead_label, source, sampling_hz, samples, beats, hint, usable_s
			FROM recording_leads WHERE recording_id = $1 AND lead_index = $2`, recordingID, lead).
			Scan(&nu.Lead, &source, &rate, &samples, &beats, &hint, &usable)
		if errors.Is(err, pgx.ErrNoRows) {
			return refuse("choose one of the recording's leads")
		}
		if err != nil {
			return err
		}
		nu.Index, nu.UsableS, nu.Beats = lead, float64(usable), len(beats)
		nu.TooShort = ecg.TooShort(nu.UsableS)
		_, err = tx.Exec(ctx, `
			UPDATE recordings SET lead_index = $2, lead_label = $3, source = $4, sampling_hz = $5, samples = $6, beats = $7, hint = $8,
			  usable_s = $9, too_short = $10
			WHERE id = $1`, recordingID, lead, nu.Lead, source, rate, samples, beats, hint, usable, nu.TooShort)
		if err != nil {
			return err
		}
		return audit(ctx, tx, a, "recording.lead", "recording", strconv.FormatInt(recordingID, 10), old, nu)
	})
	if err != nil {
		return Recording{}, mapErr("choose lead", err)
	}
	return s.Recording(ctx, recordingID)
}

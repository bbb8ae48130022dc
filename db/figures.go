package db

// One code path per number: the screening cascade (progress page, weekly
// report) and the agreement statistics (confirmations) are both computed here
// from the same rows, read once per call by figureRows. Nothing else in the
// application counts confirmed cases, over-reads or flagged episodes.

import (
	"cmp"
	"context"
	"fmt"
	"slices"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/stats"

	"github.com/jackc/pgx/v5"
)

// CascadeFilter chooses whose figures are counted.
type CascadeFilter struct {
	// ProtocolID is the protocol version whose screening results and cases
	// count; 0 is the active version (or the newest when none is active).
	ProtocolID int
	// SiteID restricts the figures to one site's participants; 0 is all.
	SiteID int
	// From and To keep participants enrolled on a day in [From, To), each
	// compared by its calendar day in its own location; zero is open. The
	// participants' later history is followed whatever its date.
	From, To time.Time
	// AsOf is the day open cases are censored at in the time to over-read;
	// zero is now. Counts are as the database stands when they are read.
	AsOf time.Time
}

// ProtocolRef names a screening protocol version.
type ProtocolRef struct {
	ID      int
	Name    string
	Version int
	Active  bool
}

// Label is "name vN".
func (p ProtocolRef) Label() string {
	if p.ID == 0 {
		return "no protocol"
	}
	return fmt.Sprintf("%s v%d", p.Name, p.Version)
}

// Stage is how far a flagged episode (a case) has come, in the order of the
// cascade's boxes from "screen-positive" on.
type Stage int

// The stages of an episode.
const (
	StageFlagged   Stage = iota // a case was opened
	StageReached                // the participant was reached
	StageRecording              // at least one recording is stored
	StageOverRead               // a diagnostic over-read settled an interpretable rhythm
	StageConfirmed              // that rhythm is AF
	StageReferred               // AF confirmed and the case ended "referred"
)

// ExitReason says why a participant in one cascade box is not in the next.
// Reasons marked in progress are not exits yet: the participant may still
// move on.
type ExitReason string

// The reasons for leaving the cascade.
const (
	ExitNoWearData        ExitReason = "no_wear_data"        // enrolled, no week with enough wear yet (in progress)
	ExitWithdrawnEarly    ExitReason = "withdrawn_early"     // withdrew before any week with enough wear
	ExitScreenNegative    ExitReason = "screen_negative"     // every screened week negative (in progress)
	ExitNoCase            ExitReason = "no_case"             // screen-positive, no case opened yet (in progress)
	ExitContacting        ExitReason = "contacting"          // still being contacted (in progress)
	ExitUnreachable       ExitReason = "unreachable"         // case closed as unreachable
	ExitDeclined          ExitReason = "declined"            // case closed as declined
	ExitWithdrawn         ExitReason = "withdrawn"           // case closed because the participant withdrew
	ExitClosed            ExitReason = "closed"              // case closed another way at this stage
	ExitAwaitingRecording ExitReason = "awaiting_recording"  // reached, no recording stored yet (in progress)
	ExitAwaitingOverRead  ExitReason = "awaiting_over_read"  // recording stored, no reading yet (in progress)
	ExitDisagreement      ExitReason = "disagreement"        // readers disagree, adjudication pending (in progress)
	ExitUninterpretable   ExitReason = "uninterpretable"     // the readings settled on "uninterpretable"
	ExitTooShort          ExitReason = "too_short"           // every recording is under 30 s
	ExitNotAFSinus        ExitReason = "not_confirmed_sinus" // over-read: sinus rhythm
	ExitNotAFFlutter      ExitReason = "not_confirmed_flutter"
	ExitNotAFOther        ExitReason = "not_confirmed_other"
	ExitReferralPending   ExitReason = "referral_pending" // AF confirmed, not referred yet (in progress)
)

var exitLabels = map[ExitReason]string{
	ExitNoWearData:        "no week with enough wear data yet",
	ExitWithdrawnEarly:    "withdrew before a week with enough wear data",
	ExitScreenNegative:    "no screen-positive week",
	ExitNoCase:            "no case opened yet",
	ExitContacting:        "still being contacted",
	ExitUnreachable:       "could not be reached",
	ExitDeclined:          "declined",
	ExitWithdrawn:         "withdrew",
	ExitClosed:            "case closed at this step",
	ExitAwaitingRecording: "recording not back yet",
	ExitAwaitingOverRead:  "waiting for an over-read",
	ExitDisagreement:      "readers disagree, waiting for adjudication",
	ExitUninterpretable:   "recording uninterpretable",
	ExitTooShort:          "recordings shorter than 30 s only",
	ExitNotAFSinus:        "not confirmed: sinus rhythm",
	ExitNotAFFlutter:      "not confirmed: atrial flutter",
	ExitNotAFOther:        "not confirmed: other arrhythmia",
	ExitReferralPending:   "referral not issued yet",
}

// Label is the wording on pages.
func (r ExitReason) Label() string {
	if l, ok := exitLabels[r]; ok {
		return l
	}
	return string(r)
}

// Known reports whether r is one of the reasons above, so a reason read from
// a request can be told from a typing error.
func (r ExitReason) Known() bool {
	_, ok := exitLabels[r]
	return ok
}

// InProgress reports whether the reason is a wait rather than a final exit.
func (r ExitReason) InProgress() bool {
	switch r {
	case ExitNoWearData, ExitScreenNegative, ExitNoCase, ExitContacting, ExitAwaitingRecording,
		ExitAwaitingOverRead, ExitDisagreement, ExitReferralPending:
		return true
	}
	return false
}

// CascadeExit is the participants of a box who did not reach the next box,
// for one reason.
type CascadeExit struct {
	Reason       ExitReason
	Participants []int64 // sorted
}

// CascadeBox is one box of the screening cascade.
type CascadeBox struct {
	Key        string // stable name: see the Cascade doc comment
	Label      string
	Definition string // how the box is counted, in words, for the page
	// Participants in the box, sorted. Count is its length.
	Participants []int64
	// Cases (flagged episodes) in the box, from "screen_positive" on: every
	// case of the protocol version whose own stage reached the box, sorted.
	// A participant with two cases counts once in Participants and twice here.
	Cases []int64
	// Exits lists, by reason, the participants in this box but not in the
	// next; empty for the last box. Count = next box's Count + all exits.
	Exits []CascadeExit
}

// Count is the number of participants in the box.
func (b CascadeBox) Count() int { return len(b.Participants) }

// Cascade is the screening cascade in the manner of a CONSORT 2010 flow
// diagram: eight nested boxes of participants, each with the reasons for
// leaving. The boxes, by Key:
//
//   - enrolled: participants enrolled at the site(s) in the window.
//   - sufficient_wear: of those, participants with at least one week with a
//     verdict (positive or negative, not "insufficient data") under the
//     protocol version, or a case opened by it.
//   - screen_positive: participants with at least one screen-positive week
//     under the version, or a case opened by it. Cases from here on are the
//     version's cases of these participants (flagged episodes).
//   - reached: participants with a case that ever reached the "reached"
//     state (its reached time is set, or its state lies beyond "reached"), or
//     that has a recording.
//   - recording_returned: participants with a case holding at least one
//     stored recording (of any length).
//   - over_read: participants with a case on which a recording of at least
//     30 s has readings that settle an interpretable rhythm (overread.Resolve:
//     one reading, two that agree, or an adjudication). Counted from the
//     readings, not from the case's state.
//   - af_confirmed: participants with a case whose settled rhythm on such a
//     recording is AF.
//   - referred: participants with an AF-confirmed case in the "referred"
//     state. A referral for another rhythm is not counted here; that case
//     shows among the "not confirmed" exits of af_confirmed.
//
// A participant's exit reason comes from their case that went furthest (the
// latest flagged among equals); see ExitReason for the reasons.
type Cascade struct {
	Filter   CascadeFilter // as given, with ProtocolID resolved
	Protocol ProtocolRef
	Versions []ProtocolRef // every version, for choosing
	Boxes    []CascadeBox
}

// Box returns the box with the given key, or a zero box.
func (c Cascade) Box(key string) CascadeBox {
	for _, b := range c.Boxes {
		if b.Key == key {
			return b
		}
	}
	return CascadeBox{}
}

var cascadeBoxes = []struct{ key, label, def string }{
	{"enrolled", "Enrolled", "participants enrolled in the period at the chosen site(s)"},
	{"sufficient_wear", "With enough wear data", "at least one week with a screening verdict (positive or negative) under the protocol version"},
	{"screen_positive", "Screen-positive", "at least one screen-positive week under the protocol version (flagged episodes are its cases)"},
	{"reached", "Reached", "a case that ever reached the 'reached' state"},
	{"recording_returned", "Recording returned", "a case with at least one stored ECG recording"},
	{"over_read", "Over-read", "a case with an interpretable over-read settled on a recording of at least 30 s"},
	{"af_confirmed", "AF confirmed", "a case whose settled over-read is atrial fibrillation"},
	{"referred", "Referred", "an AF-confirmed case that was referred to the participant's physician"},
}

// figPerson is a participant as the figures see them.
type figPerson struct {
	id         int64
	site       string
	sex        cohort.Sex
	age        *int
	withdrawn  bool
	sufficient bool // a week with a verdict under the chosen version
	positive   bool // a positive week under the chosen version
}

// figRecording is a recording as the figures see it.
type figRecording struct {
	id       int64
	auto     overread.Auto
	tooShort bool
	verdict  overread.Conclusion
}

// diagnostic applies overread's diagnostic-recording rule.
func (r figRecording) diagnostic() bool { return r.verdict.Diagnostic(r.tooShort) }

// figEpisode is a case as the figures see it.
type figEpisode struct {
	caseID, participantID int64
	protocolID            int
	state                 followup.State
	flagged               time.Time
	reachedAt             time.Time
	closedAt              time.Time
	recs                  []figRecording
}

func (e figEpisode) reached() bool {
	if !e.reachedAt.IsZero() || len(e.recs) > 0 {
		return true
	}
	switch e.state {
	case followup.Reached, followup.RecorderSent, followup.RecordingReceived, followup.OverRead, followup.Referred, followup.ClosedNotConfirmed:
		return true
	}
	return false
}

// firstDiagnostic returns the settled day of the earliest diagnostic verdict
// and whether there is one.
func (e figEpisode) firstDiagnostic() (cohort.Date, bool) {
	var d cohort.Date
	ok := false
	for _, r := range e.recs {
		if r.diagnostic() && (!ok || r.verdict.SettledOn.Before(d)) {
			d, ok = r.verdict.SettledOn, true
		}
	}
	return d, ok
}

func (e figEpisode) confirmed() bool {
	for _, r := range e.recs {
		if r.diagnostic() && r.verdict.Rhythm == overread.AF {
			return true
		}
	}
	return false
}

// stage is how far the episode came; see the Cascade doc comment.
func (e figEpisode) stage() Stage {
	_, read := e.firstDiagnostic()
	switch {
	case e.confirmed() && e.state == followup.Referred:
		return StageReferred
	case e.confirmed():
		return StageConfirmed
	case read:
		return StageOverRead
	case len(e.recs) > 0:
		return StageRecording
	case e.reached():
		return StageReached
	}
	return StageFlagged
}

// closedReason maps a final state to an exit reason.
func closedReason(st followup.State) ExitReason {
	switch st {
	case followup.ClosedUnreachable:
		return ExitUnreachable
	case followup.ClosedDeclined:
		return ExitDeclined
	case followup.ClosedWithdrawn:
		return ExitWithdrawn
	}
	return ExitClosed
}

// exit is why an episode stopped at its stage.
func (e figEpisode) exit() ExitReason {
	final := e.state.Terminal()
	switch e.stage() {
	case StageFlagged:
		if final {
			return closedReason(e.state)
		}
		return ExitContacting
	case StageReached:
		if final {
			return closedReason(e.state)
		}
		return ExitAwaitingRecording
	case StageRecording:
		var uninterp, disagree, unread bool
		allShort := true
		for _, r := range e.recs {
			uninterp = uninterp || (r.verdict.Final && r.verdict.Rhythm == overread.Uninterpretable)
			disagree = disagree || r.verdict.Status == overread.Disagreed
			unread = unread || r.verdict.Status == overread.Unread
			allShort = allShort && r.tooShort
		}
		switch {
		case final && uninterp:
			return ExitUninterpretable
		case allShort:
			return ExitTooShort
		case final:
			return closedReason(e.state)
		case disagree:
			return ExitDisagreement
		case unread:
			return ExitAwaitingOverRead
		case uninterp:
			return ExitUninterpretable
		}
		return ExitAwaitingOverRead
	case StageOverRead:
		// The most notable rhythm among the diagnostic readings names it.
		reason := ExitNotAFSinus
		for _, r := range e.recs {
			if !r.diagnostic() {
				continue
			}
			switch {
			case r.verdict.Rhythm == overread.Flutter:
				reason = ExitNotAFFlutter
			case r.verdict.Rhythm == overread.Other && reason != ExitNotAFFlutter:
				reason = ExitNotAFOther
			}
		}
		return reason
	case StageConfirmed:
		if final {
			return closedReason(e.state)
		}
		return ExitReferralPending
	}
	return ""
}

// figureRows is everything the cascade and the agreement statistics are
// computed from.
type figureRows struct {
	protocol ProtocolRef
	versions []ProtocolRef
	loc      *time.Location
	asOf     cohort.Date
	people   []figPerson
	// episodes of those people under every protocol version, in case order
	episodes []figEpisode
}

// figureRows reads, in one read-only snapshot, the participants chosen by f
// with their screening flags under the chosen version, all their cases, the
// cases' recordings and the readings' verdicts.
func (s *Store) figureRows(ctx context.Context, f CascadeFilter) (figureRows, error) {
	var out figureRows
	st, err := s.StudySettings(ctx)
	if err != nil {
		return out, err
	}
	out.loc = st.Location()
	asOf := f.AsOf
	if asOf.IsZero() {
		asOf = s.now()
	}
	out.asOf = cohort.DateOf(asOf.In(out.loc))
	err = pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly, IsoLevel: pgx.RepeatableRead}, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `SELECT id, name, version, active FROM protocols ORDER BY name, version, id`)
		if err != nil {
			return err
		}
		out.versions, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (ProtocolRef, error) {
			var p ProtocolRef
			err := r.Scan(&p.ID, &p.Name, &p.Version, &p.Active)
			return p, err
		})
		if err != nil {
			return err
		}
		var active, newest ProtocolRef
		for _, p := range out.versions {
			if p.Active {
				active = p
			}
			if p.ID > newest.ID {
				newest = p
			}
			if f.ProtocolID != 0 && p.ID == f.ProtocolID {
				out.protocol = p
			}
		}
		switch {
		case f.ProtocolID != 0 && out.protocol.ID == 0:
			return fmt.Errorf("protocol %d: %w", f.ProtocolID, cohort.ErrNotFound)
		case f.ProtocolID == 0 && active.ID != 0:
			out.protocol = active
		case f.ProtocolID == 0:
			out.protocol = newest // none active
		}
		var from, to *string
		if !f.From.IsZero() {
			d := cohort.DateOf(f.From).String()
			from = &d
		}
		if !f.To.IsZero() {
			d := cohort.DateOf(f.To).String()
			to = &d
		}
		// The chosen participants, as a condition every query below repeats.
		const chosen = `($1 = 0 OR p.site_id = $1) AND ($2::date IS NULL OR p.enrolled_on >= $2::date) AND ($3::date IS NULL OR p.enrolled_on < $3::date)`
		rows, err = tx.Query(ctx, `
			WITH sr AS (
			  SELECT participant_id, bool_or(verdict <> 'insufficient') AS sufficient, bool_or(verdict = 'positive') AS positive
			  FROM screen_results WHERE protocol_id = $4 GROUP BY participant_id)
			SELECT p.id, st.code, p.sex, p.age_at_enrolment, p.withdrawn_on IS NOT NULL, coalesce(sr.sufficient, false), coalesce(sr.positive, false)
			FROM participants p JOIN sites st ON st.id = p.site_id LEFT JOIN sr ON sr.participant_id = p.id
			WHERE `+chosen+` ORDER BY p.id`, f.SiteID, from, to, out.protocol.ID)
		if err != nil {
			return err
		}
		out.people, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (figPerson, error) {
			var p figPerson
			var sex string
			var age *int16
			err := r.Scan(&p.id, &p.site, &sex, &age, &p.withdrawn, &p.sufficient, &p.positive)
			p.sex = cohort.Sex(sex)
			if age != nil {
				a := int(*age)
				p.age = &a
			}
			return p, err
		})
		if err != nil {
			return err
		}
		rows, err = tx.Query(ctx, `
			SELECT c.id, c.participant_id, c.protocol_id, c.state, c.flagged_at, c.reached_at, c.closed_at
			FROM cases c JOIN participants p ON p.id = c.participant_id WHERE `+chosen+` ORDER BY c.id`, f.SiteID, from, to)
		if err != nil {
			return err
		}
		out.episodes, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (figEpisode, error) {
			var e figEpisode
			var state string
			var reached, closed *time.Time
			err := r.Scan(&e.caseID, &e.participantID, &e.protocolID, &state, &e.flagged, &reached, &closed)
			e.state, e.reachedAt, e.closedAt = followup.State(state), timeOf(reached), timeOf(closed)
			return e, err
		})
		if err != nil {
			return err
		}
		byCase := make(map[int64]int, len(out.episodes))
		for i, e := range out.episodes {
			byCase[e.caseID] = i
		}
		rows, err = tx.Query(ctx, `
			SELECT r.id, r.case_id, r.auto_interpretation, r.too_short
			FROM recordings r JOIN participants p ON p.id = r.participant_id WHERE `+chosen+` ORDER BY r.taken_at, r.id`, f.SiteID, from, to)
		if err != nil {
			return err
		}
		type recRow struct {
			caseID int64
			rec    figRecording
		}
		recs, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (recRow, error) {
			var x recRow
			var auto string
			err := r.Scan(&x.rec.id, &x.caseID, &auto, &x.rec.tooShort)
			x.rec.auto = overread.Auto(auto)
			return x, err
		})
		if err != nil {
			return err
		}
		recIDs := make([]int64, len(recs))
		for i, x := range recs {
			recIDs[i] = x.rec.id
		}
		readings, err := readingsOf(ctx, tx, recIDs)
		if err != nil {
			return err
		}
		for _, x := range recs {
			if x.rec.verdict, err = conclusionOf(x.rec.id, readings[x.rec.id]); err != nil {
				return err
			}
			e := &out.episodes[byCase[x.caseID]]
			e.recs = append(e.recs, x.rec)
		}
		return nil
	})
	return out, mapErr("figures", err)
}

// Cascade counts the screening cascade for the filter; see the Cascade type
// for how each box is defined.
func (s *Store) Cascade(ctx context.Context, f CascadeFilter) (Cascade, error) {
	rows, err := s.figureRows(ctx, f)
	if err != nil {
		return Cascade{}, err
	}
	return rows.cascade(f), nil
}

func (fr figureRows) cascade(f CascadeFilter) Cascade {
	f.ProtocolID = fr.protocol.ID
	out := Cascade{Filter: f, Protocol: fr.protocol, Versions: fr.versions}
	// Each participant's furthest case under the version.
	type best struct {
		stage Stage
		ep    *figEpisode
	}
	furthest := map[int64]best{}
	casesAt := make([][]int64, StageReferred+1)
	for i := range fr.episodes {
		e := &fr.episodes[i]
		if e.protocolID != fr.protocol.ID {
			continue
		}
		st := e.stage()
		for k := StageFlagged; k <= st; k++ {
			casesAt[k] = append(casesAt[k], e.caseID)
		}
		b, ok := furthest[e.participantID]
		if !ok || st > b.stage || (st == b.stage && !e.flagged.Before(b.ep.flagged)) {
			furthest[e.participantID] = best{st, e}
		}
	}
	boxes := make([]CascadeBox, len(cascadeBoxes))
	for i, b := range cascadeBoxes {
		boxes[i] = CascadeBox{Key: b.key, Label: b.label, Definition: b.def}
	}
	exits := make([]map[ExitReason][]int64, len(boxes))
	for i := range exits {
		exits[i] = map[ExitReason][]int64{}
	}
	for _, p := range fr.people {
		boxes[0].Participants = append(boxes[0].Participants, p.id)
		b, hasCase := furthest[p.id]
		if !p.sufficient && !hasCase {
			r := ExitNoWearData
			if p.withdrawn {
				r = ExitWithdrawnEarly
			}
			exits[0][r] = append(exits[0][r], p.id)
			continue
		}
		boxes[1].Participants = append(boxes[1].Participants, p.id)
		if !p.positive && !hasCase {
			exits[1][ExitScreenNegative] = append(exits[1][ExitScreenNegative], p.id)
			continue
		}
		boxes[2].Participants = append(boxes[2].Participants, p.id)
		if !hasCase {
			exits[2][ExitNoCase] = append(exits[2][ExitNoCase], p.id)
			continue
		}
		// Box 2 holds stage StageFlagged; box 2+k holds stage k.
		for k := StageReached; k <= b.stage; k++ {
			boxes[2+int(k)].Participants = append(boxes[2+int(k)].Participants, p.id)
		}
		if b.stage < StageReferred {
			r := b.ep.exit()
			exits[2+int(b.stage)][r] = append(exits[2+int(b.stage)][r], p.id)
		}
	}
	for k := StageFlagged; k <= StageReferred; k++ {
		boxes[2+int(k)].Cases = casesAt[k]
	}
	for i := range boxes {
		slices.Sort(boxes[i].Participants)
		slices.Sort(boxes[i].Cases)
		for r, ids := range exits[i] {
			slices.Sort(ids)
			boxes[i].Exits = append(boxes[i].Exits, CascadeExit{Reason: r, Participants: ids})
		}
		slices.SortFunc(boxes[i].Exits, func(a, b CascadeExit) int {
			return cmp.Or(cmp.Compare(len(b.Participants), len(a.Participants)), cmp.Compare(a.Reason, b.Reason))
		})
	}
	out.Boxes = boxes
	return out
}

// AgreementGroup is one row of the agreement statistics: the flagged
// episodes (cases) of one protocol version and subgroup.
type AgreementGroup struct {
	Dimension string // "all", "protocol", "site", "sex" or "age band"
	Label     string
	// The episode counts are the cascade's case boxes for the same rows:
	// Flagged is screen_positive, WithRecording recording_returned, OverRead
	// over_read and Confirmed af_confirmed.
	Flagged       int
	WithRecording int
	OverRead      int
	Confirmed     int
	// PPV of the flag: Confirmed / OverRead, the episodes with a settled
	// interpretable over-read (diagnostic length), with Wilson and
	// Clopper-Pearson intervals (stats.ProportionCI). The intervals are
	// zero when OverRead is 0.
	PPV    stats.Fraction
	Wilson stats.Interval
	Exact  stats.Interval
	// Uninterpretable reports separately the episodes whose settled readings
	// are only "uninterpretable" (no diagnostic over-read), out of Read, the
	// episodes with any settled reading.
	Uninterpretable stats.Fraction
	// Time from flag to over-read in days (flag day to the day the first
	// diagnostic verdict was settled); episodes without one are censored at
	// their closing day, or at the as-of day while open.
	Median   stats.Median
	Events   int
	Censored int
}

// KappaResult compares the recorder's automatic interpretation (rows) with
// the settled over-read (columns) in overread.Categories, over recordings of
// at least 30 s that have both.
type KappaResult struct {
	Categories []overread.Category
	Table      [][]int
	N          int
	Kappa      stats.Kappa
	CI         stats.Interval
	Err        string // why kappa is not given (no recordings, or undefined)
}

// Agreement is how well the flag predicts AF and how the recorder agrees with
// the over-readers, for one protocol version.
type Agreement struct {
	Protocol  ProtocolRef
	Versions  []ProtocolRef // every version, for choosing
	AsOf      cohort.Date
	Conf      float64
	ByVersion []AgreementGroup // one row per version, all subgroups together
	Groups    []AgreementGroup // the chosen version: all, then by site, sex and age band
	Curve     stats.Curve      // time from flag to over-read, the chosen version's episodes
	Kappa     KappaResult
}

// agreementConf is the confidence level of every interval on the page.
const agreementConf = 0.95

// Agreement computes the agreement statistics for the filter's protocol
// version (subgroups) and for every version, from the cascade's rows.
func (s *Store) Agreement(ctx context.Context, f CascadeFilter) (Agreement, error) {
	fr, err := s.figureRows(ctx, f)
	if err != nil {
		return Agreement{}, err
	}
	return fr.agreement()
}

// Figures computes the cascade and the agreement statistics from one read,
// so a report that shows both shows them as the database stood at one
// moment; each is exactly what Cascade and Agreement return for f.
func (s *Store) Figures(ctx context.Context, f CascadeFilter) (Cascade, Agreement, error) {
	fr, err := s.figureRows(ctx, f)
	if err != nil {
		return Cascade{}, Agreement{}, err
	}
	a, err := fr.agreement()
	if err != nil {
		return Cascade{}, Agreement{}, err
	}
	return fr.cascade(f), a, nil
}


func (fr figureRows) agreement() (Agreement, error) {
	out := Agreement{Protocol: fr.protocol, Versions: fr.versions, AsOf: fr.asOf, Conf: agreementConf}
	people := make(map[int64]figPerson, len(fr.people))
	for _, p := range fr.people {
		people[p.id] = p
	}
	bands, err := stats.NewAgeBands(stats.DefaultAgeCuts()...)
	if err != nil {
		return out, err
	}
	for _, v := range fr.versions {
		g, _, err := fr.group("protocol", v.Label(), func(e figEpisode) bool { return e.protocolID == v.ID })
		if err != nil {
			return out, err
		}
		out.ByVersion = append(out.ByVersion, g)
	}
	of := func(e figEpisode) bool { return e.protocolID == fr.protocol.ID }
	all, curve, err := fr.group("all", "all", of)
	if err != nil {
		return out, err
	}
	out.Groups, out.Curve = append(out.Groups, all), curve
	type sub struct{ dim, label string }
	var subs []sub
	seen := map[sub]bool{}
	add := func(s sub) {
		if !seen[s] {
			seen[s] = true
			subs = append(subs, s)
		}
	}
	var sites []string
	for _, p := range fr.people {
		if !slices.Contains(sites, p.site) {
			sites = append(sites, p.site)
		}
	}
	slices.Sort(sites)
	for _, s := range sites {
		add(sub{"site", s})
	}
	for _, s := range []cohort.Sex{cohort.Female, cohort.Male, cohort.Unknown} {
		add(sub{"sex", s.Label()})
	}
	for _, l := range bands.Labels() {
		add(sub{"age band", l})
	}
	add(sub{"age band", "age not recorded"})
	key := func(p figPerson, dim string) string {
		switch dim {
		case "site":
			return p.site
		case "sex":
			return p.sex.Label()
		}
		if p.age == nil {
			return "age not recorded"
		}
		return bands.Label(*p.age)
	}
	for _, sg := range subs {
		g, _, err := fr.group(sg.dim, sg.label, func(e figEpisode) bool { return of(e) && key(people[e.participantID], sg.dim) == sg.label })
		if err != nil {
			return out, err
		}
		if g.Flagged == 0 && (sg.dim == "sex" && sg.label == "not recorded" || sg.label == "age not recorded") {
			continue // keep the table short when nobody lacks the value
		}
		out.Groups = append(out.Groups, g)
	}
	out.Kappa = fr.kappa(of)
	return out, nil
}

// group computes one row of the statistics over the episodes that match.
func (fr figureRows) group(dim, label string, match func(figEpisode) bool) (AgreementGroup, stats.Curve, error) {
	g := AgreementGroup{Dimension: dim, Label: label}
	var obs []stats.Obs
	read, uninterp := 0, 0
	for _, e := range fr.episodes {
		if !match(e) {
			continue
		}
		st := e.stage()
		g.Flagged++
		if st >= StageRecording {
			g.WithRecording++
		}
		if st >= StageOverRead {
			g.OverRead++
		}
		if st >= StageConfirmed {
			g.Confirmed++
		}
		anySettled, onlyUninterp := false, true
		for _, r := range e.recs {
			if r.verdict.Final {
				anySettled = true
				if r.verdict.Rhythm != overread.Uninterpretable {
					onlyUninterp = false
				}
			}
		}
		if anySettled {
			read++
			if onlyUninterp && st < StageOverRead {
				uninterp++
			}
		}
		flagDay := cohort.DateOf(e.flagged.In(fr.loc))
		if d, ok := e.firstDiagnostic(); ok {
			obs = append(obs, stats.Obs{Time: float64(max(0, d.DaysSince(flagDay))), Event: true})
			continue
		}
		end := fr.asOf
		if e.state.Terminal() && !e.closedAt.IsZero() {
			end = cohort.DateOf(e.closedAt.In(fr.loc))
		}
		obs = append(obs, stats.Obs{Time: float64(max(0, end.DaysSince(flagDay))), Event: false})
	}
	g.PPV = stats.Fraction{X: g.Confirmed, N: g.OverRead}
	g.Uninterpretable = stats.Fraction{X: uninterp, N: read}
	if g.OverRead > 0 {
		var err error
		if g.Wilson, err = g.PPV.CI(stats.Wilson, agreementConf); err != nil {
			return g, stats.Curve{}, err
		}
		if g.Exact, err = g.PPV.CI(stats.ClopperPearson, agreementConf); err != nil {
			return g, stats.Curve{}, err
		}
	}
	curve, err := stats.KaplanMeier(obs, agreementConf)
	if err != nil {
		return g, curve, err
	}
	g.Median, g.Events, g.Censored = curve.Median(), curve.Events, curve.N-curve.Events
	return g, curve, nil
}

// kappa tabulates automatic interpretation against settled over-read.
func (fr figureRows) kappa(match func(figEpisode) bool) KappaResult {
	cats := overread.Categories()
	k := KappaResult{Categories: cats, Table: make([][]int, len(cats))}
	for i := range k.Table {
		k.Table[i] = make([]int, len(cats))
	}
	index := func(c overread.Category) int { return slices.Index(cats, c) }
	for _, e := range fr.episodes {
		if !match(e) {
			continue
		}
		for _, r := range e.recs {
			a, okA := overread.AutoCategory(r.auto)
			b, okB := overread.RhythmCategory(r.verdict.Rhythm)
			if !okA || !okB || !r.verdict.Final || r.tooShort {
				continue
			}
			k.Table[index(a)][index(b)]++
			k.N++
		}
	}
	if k.N == 0 {
		k.Err = "no recording of at least 30 s has both an automatic interpretation and a settled over-read yet"
		return k
	}
	var err error
	if k.Kappa, err = stats.CohenKappa(k.Table); err != nil {
		k.Err = "kappa is undefined for this table (both raters used a single category)"
		return k
	}
	if k.CI, err = k.Kappa.CI(agreementConf); err != nil {
		k.Err = err.Error()
	}
	return k
}

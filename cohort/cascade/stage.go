package cascade

import (
	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
)

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

// reached reports whether the participant was ever reached on the episode:
// its reached time is set, its state lies beyond "reached", or it holds a
// recording.
func (e Episode) reached() bool {
	if !e.ReachedAt.IsZero() || len(e.Recordings) > 0 {
		return true
	}
	switch e.State {
	case followup.Reached, followup.RecorderSent, followup.RecordingReceived, followup.OverRead, followup.Referred, followup.ClosedNotConfirmed:
		return true
	}
	return false
}

// firstDiagnostic returns the settled day of the earliest diagnostic
// conclusion and whether there is one.
func (e Episode) firstDiagnostic() (cohort.Date, bool) {
	var d cohort.Date
	ok := false
	for _, r := range e.Recordings {
		if r.diagnostic() && (!ok || r.Conclusion.SettledOn.Before(d)) {
			d, ok = r.Conclusion.SettledOn, true
		}
	}
	return d, ok
}

// confirmed reports whether a diagnostic recording of the episode settled on AF.
func (e Episode) confirmed() bool {
	for _, r := range e.Recordings {
		if r.Conclusion.ConfirmsAF(r.TooShort) {
			return true
		}
	}
	return false
}

// stage is how far the episode came; see the Cascade doc comment.
func (e Episode) stage() Stage {
	_, read := e.firstDiagnostic()
	switch {
	case e.confirmed() && e.State == followup.Referred:
		return StageReferred
	case e.confirmed():
		return StageConfirmed
	case read:
		return StageOverRead
	case len(e.Recordings) > 0:
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

// exit is why an episode stopped at its stage ("" for a referred one).
func (e Episode) exit() ExitReason {
	final := e.State.Terminal()
	switch e.stage() {
	case StageFlagged:
		if final {
			return closedReason(e.State)
		}
		return ExitContacting
	case StageReached:
		if final {
			return closedReason(e.State)
		}
		return ExitAwaitingRecording
	case StageRecording:
		var uninterp, disagree, unread bool
		allShort := true
		for _, r := range e.Recordings {
			uninterp = uninterp || (r.Conclusion.Final && r.Conclusion.Rhythm == overread.Uninterpretable)
			disagree = disagree || r.Conclusion.Status == overread.Disagreed
			unread = unread || r.Conclusion.Status == overread.Unread
			allShort = allShort && r.TooShort
		}
		switch {
		case final && uninterp:
			return ExitUninterpretable
		case allShort:
			return ExitTooShort
		case final:
			return closedReason(e.State)
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
		for _, r := range e.Recordings {
			if !r.diagnostic() {
				continue
			}
			switch {
			case r.Conclusion.Rhythm == overread.Flutter:
				reason = ExitNotAFFlutter
			case r.Conclusion.Rhythm == overread.Other && reason != ExitNotAFFlutter:
				reason = ExitNotAFOther
			}
		}
		return reason
	case StageConfirmed:
		if final {
			return closedReason(e.State)
		}
		return ExitReferralPending
	}
	return ""
}

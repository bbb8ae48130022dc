package followup

import (
	"cohortdesk/cohort"
	"fmt"
	"time"
)

// Channel is how staff tried to reach a participant. Values are stored.
type Channel string

// The contact channels a study uses.
const (
	ChannelPhone  Channel = "phone"
	ChannelEmail  Channel = "email"
	ChannelText   Channel = "text_message"
	ChannelLetter Channel = "letter"
)

var channelLabels = cohort.Words[Channel]{
	ChannelPhone:  "phone",
	ChannelEmail:  "e-mail",
	ChannelText:   "text message",
	ChannelLetter: "letter",
}

// Channels lists the channels in the order a form offers them.
func Channels() []Channel {
	return []Channel{ChannelPhone, ChannelEmail, ChannelText, ChannelLetter}
}

// ParseChannel reads a stored or submitted channel value.
func ParseChannel(s string) (Channel, error) {
	return channelLabels.Parse(s, "followup: unknown contact channel")
}

// Valid reports whether c is a defined channel.
func (c Channel) Valid() bool { return channelLabels.Valid(c) }

// Label is the wording shown on pages; unknown values are shown quoted.
func (c Channel) Label() string { return channelLabels.Label(c) }

// Outcome is what came of one contact attempt. Values are stored.
type Outcome string

// The outcomes of a contact attempt. OutcomeWrongNumber also covers a bounced
// e-mail or a returned letter: in each case the contact detail is wrong, which
// is what the coordinator needs to know.
const (
	OutcomeReached     Outcome = "reached"
	OutcomeNoAnswer    Outcome = "no_answer"
	OutcomeMessageLeft Outcome = "message_left"
	OutcomeWrongNumber Outcome = "wrong_number"
	OutcomeDeclined    Outcome = "declined"
	// OutcomeUndeliverable is set by the desk, never entered: a message it
	// sent did not reach the participant (refused for good, or not sent
	// after repeated failures). It says nothing about the participant, so it
	// does not count as unanswered.
	OutcomeUndeliverable Outcome = "undeliverable"
)

var outcomeLabels = cohort.Words[Outcome]{
	OutcomeReached:       "reached",
	OutcomeNoAnswer:      "no answer",
	OutcomeMessageLeft:   "message left",
	OutcomeWrongNumber:   "wrong number or address",
	OutcomeDeclined:      "declined",
	OutcomeUndeliverable: "not delivered",
}

// Outcomes lists the outcomes people enter, in the order a form offers them
// (OutcomeUndeliverable is the desk's own and is not among them).
func Outcomes() []Outcome {
	return []Outcome{OutcomeReached, OutcomeNoAnswer, OutcomeMessageLeft, OutcomeWrongNumber, OutcomeDeclined}
}

// ParseOutcome reads a stored or submitted outcome value.
func ParseOutcome(s string) (Outcome, error) {
	return outcomeLabels.Parse(s, "followup: unknown contact outcome")
}

// Valid reports whether o is a defined outcome.
func (o Outcome) Valid() bool { return outcomeLabels.Valid(o) }

// Label is the wording shown on pages; unknown values are shown quoted.
func (o Outcome) Label() string { return outcomeLabels.Label(o) }

// Unanswered reports whether the attempt failed to get a conversation; only
// such attempts count toward suggesting that a case be closed as unreachable.
func (o Outcome) Unanswered() bool {
	return o == OutcomeNoAnswer || o == OutcomeMessageLeft || o == OutcomeWrongNumber
}

// Attempt is one logged contact attempt. Free-text notes stay in the store;
// the rules here need only when, how and with what result.
type Attempt struct {
	At      time.Time
	Channel Channel
	Outcome Outcome
}

// AfterAttempt gives the state a case should move to once an attempt with
// outcome o is logged while the case is in current. move is false when the
// attempt changes nothing (a reminder call after the recorder went out, a call
// on a closed case to pass on news).
//
// The rules: a participant reached while the case is open or contacting moves
// it to reached; a decline closes the case as declined wherever the state table
// allows that (after the over-read it does not: the coordinator decides, for
// example closing as withdrawn if consent was withdrawn); any other outcome on
// an open case marks the first attempt by moving it to contacting.
func AfterAttempt(current State, o Outcome) (next State, move bool, err error) {
	if !current.Valid() {
		return current, false, fmt.Errorf("followup: attempt on a case in unknown state %q", string(current))
	}
	if !o.Valid() {
		return current, false, fmt.Errorf("followup: attempt with unknown outcome %q", string(o))
	}
	switch {
	case o == OutcomeDeclined:
		if CanMove(current, ClosedDeclined) {
			return ClosedDeclined, true, nil
		}
	case o == OutcomeReached:
		if current == Open || current == Contacting {
			return Reached, true, nil
		}
	case current == Open:
		return Contacting, true, nil
	}
	return current, false, nil
}

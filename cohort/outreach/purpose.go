package outreach

import (
	"fmt"
	"slices"

	"cohortdesk/cohort/followup"
)

// Purpose is what a message is for. A study keeps one template per purpose
// and channel. The values are stored; the labels may be reworded.
type Purpose string

// The purposes of messages to participants.
const (
	PurposeFirstContact   Purpose = "first_contact"   // the first approach after a flag: please get in touch
	PurposeReminder       Purpose = "reminder"        // no answer yet: please get in touch
	PurposeRecorderOut    Purpose = "recorder_out"    // the recorder is in the post, with its tracking number
	PurposeRecorderReturn Purpose = "recorder_return" // please make the recording and send the recorder back
	PurposeTalkNextSteps  Purpose = "talk_next_steps" // the team would like to talk about the next steps
)

type purposeInfo struct {
	label    string
	required []Placeholder // placeholders the body must use
	// states a case may be in for the desk to suggest the purpose there, in
	// the order offered
	suggestedIn []followup.State
}

var purposeTable = map[Purpose]purposeInfo{
	PurposeFirstContact:   {"first contact", []Placeholder{ContactLine, ReplyBy}, []followup.State{followup.Open}},
	PurposeReminder:       {"reminder to get in touch", []Placeholder{ContactLine}, []followup.State{followup.Contacting}},
	PurposeRecorderOut:    {"recorder on its way", []Placeholder{ContactLine, TrackingNumber}, []followup.State{followup.RecorderSent}},
	PurposeRecorderReturn: {"recorder return reminder", []Placeholder{ContactLine, ReplyBy}, []followup.State{followup.RecorderSent}},
	PurposeTalkNextSteps:  {"please call about next steps", []Placeholder{ContactLine}, []followup.State{followup.OverRead, followup.RecordingReceived}},
}

// Purposes lists the purposes in the order the editor and the forms offer
// them.
func Purposes() []Purpose {
	return []Purpose{PurposeFirstContact, PurposeReminder, PurposeRecorderOut, PurposeRecorderReturn, PurposeTalkNextSteps}
}

// Valid reports whether p is a defined purpose.
func (p Purpose) Valid() bool { _, ok := purposeTable[p]; return ok }

// Label is the wording shown on pages; unknown values are shown quoted.
func (p Purpose) Label() string {
	if i, ok := purposeTable[p]; ok {
		return i.label
	}
	return fmt.Sprintf("%q", string(p))
}

// Required lists the placeholders a body for purpose p must use: every
// message says how to reach the study team, a recorder's shipment names its
// tracking number, and a request with a deadline gives the day.
func (p Purpose) Required() []Placeholder { return slices.Clone(purposeTable[p].required) }

// Suggested lists the purposes the desk offers first for a case in state st
// (the triage row's one-step message): a first contact for an open case, a
// reminder while contacting, the recorder's messages while it is out, a call
// about the next steps once a recording is in. Other purposes stay available
// on the case page.
func Suggested(st followup.State) []Purpose {
	var out []Purpose
	for _, p := range Purposes() {
		if slices.Contains(purposeTable[p].suggestedIn, st) {
			out = append(out, p)
		}
	}
	return out
}

// Sendable reports whether the desk sends messages on channel c: e-mail and
// text messages through the outbox, letters as a printed batch. Phone calls
// are made by people and logged as attempts.
func Sendable(c followup.Channel) bool {
	return c == followup.ChannelEmail || c == followup.ChannelText || c == followup.ChannelLetter
}

// SendableChannels lists the channels the desk sends on, in form order.
func SendableChannels() []followup.Channel {
	return []followup.Channel{followup.ChannelEmail, followup.ChannelText, followup.ChannelLetter}
}

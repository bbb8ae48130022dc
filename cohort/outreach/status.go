package outreach

import (
	"time"

	"cohortdesk/cohort"
)

// Status is where a message stands. The values are stored.
type Status string

// The states of a message.
const (
	Queued        Status = "queued"        // written to the outbox; a background job sends it (or, held, at the end of quiet hours)
	Sent          Status = "sent"          // the mail server or text gateway accepted it; a printed letter recorded as posted
	Delivered     Status = "delivered"     // the channel reported delivery (text gateways do; e-mail and letters do not)
	Undeliverable Status = "undeliverable" // refused for good: the address or number is wrong or unknown
	Failed        Status = "failed"        // not sent: temporary failures until the desk gave up, or sending was no longer allowed
)

var statusLabels = cohort.Words[Status]{
	Queued:        "queued",
	Sent:          "sent",
	Delivered:     "delivered",
	Undeliverable: "undeliverable",
	Failed:        "failed",
}

// Statuses lists the states in their usual order.
func Statuses() []Status { return []Status{Queued, Sent, Delivered, Undeliverable, Failed} }

// ParseStatus reads a stored status.
func ParseStatus(s string) (Status, error) {
	return statusLabels.Parse(s, "outreach: unknown message status")
}

// Valid reports whether s is a defined status.
func (s Status) Valid() bool { return statusLabels.Valid(s) }

// Label is the wording shown on pages; unknown values are shown quoted.
func (s Status) Label() string { return statusLabels.Label(s) }

// NotDelivered reports whether the message did not reach the participant,
// which the case shows until someone tries again.
func (s Status) NotDelivered() bool { return s == Undeliverable || s == Failed }

// SendTries is how many times the desk tries a message whose channel fails
// for now (a mail server that defers, a gateway that is busy, a connection
// that fails) before it gives up and marks the message failed.
const SendTries = 6

// Backoff is the wait after the n-th failed try (1-based): n² minutes, so
// the six tries span about 55 minutes (1 + 4 + 9 + 16 + 25).
func Backoff(n int) time.Duration { return time.Duration(n*n) * time.Minute }

// Package outreach sends what the outbox holds: the background jobs that
// hand each queued message to its channel (e-mail over SMTP, text messages
// through an HTTPS gateway, or a folder for the demo) and record the answer,
// and the morning summary. The rules of what may be sent, to whom and when
// are cohort/outreach's; the outbox is db's.
package outreach

import (
	"context"
	"errors"
)

// Outgoing is one message as a channel sends it.
type Outgoing struct {
	Key       string // the idempotency key: the same on every try of the message
	MessageID string // the e-mail Message-ID built from the key, without angle brackets
	To        string
	Subject   string
	Body      string
}

// Receipt is a channel's answer to a message it took.
type Receipt struct {
	Detail    string // the server's or gateway's answer, in its words
	Ref       string // the gateway's reference, "" for e-mail
	Delivered bool   // the channel says the message arrived (text gateways may)
}

// Transport sends messages of one channel.
type Transport interface {
	Send(ctx context.Context, m Outgoing) (Receipt, error)
}

// Refusal is a channel's refusal of a message. Permanent refusals (an SMTP
// 5xx answer, a gateway's 4xx) make the message undeliverable; others are
// tried again.
type Refusal struct {
	Permanent bool
	Detail    string
}

// Error words the refusal.
func (r *Refusal) Error() string {
	if r.Permanent {
		return "refused: " + r.Detail
	}
	return "temporary failure: " + r.Detail
}

// permanentRefusal reports whether err is a permanent refusal.
func permanentRefusal(err error) bool {
	var r *Refusal
	return errors.As(err, &r) && r.Permanent
}

package outreach

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"
	"cohortdesk/db"
)

// Store is what the sender needs from the database; *db.Store has it.
type Store interface {
	OutgoingMessage(ctx context.Context, id int64) (db.Outgoing, error)
	BeginTry(ctx context.Context, id int64) (tries int, resend, ok bool, err error)
	MessageSent(ctx context.Context, id int64, st outreach.Status, detail, ref string) error
	MessageTemporary(ctx context.Context, id int64, detail string) error
	MessageNotDelivered(ctx context.Context, id int64, st outreach.Status, detail string) error
	ReconcileMessages(ctx context.Context) (int, error)
	MorningWork(ctx context.Context) (db.Morning, error)
	MorningSummarySent(ctx context.Context, userID int64, day cohort.Date) (bool, error)
	RecordMorningSummary(ctx context.Context, userID int64, day cohort.Date) error
	EnsureMorningJob(ctx context.Context, at time.Time) error
}

// Sender runs the outbox's jobs: it sends each queued message on its channel
// and records what came of it, and sends the morning summaries.
type Sender struct {
	Store Store
	Email Transport // nil: e-mail is not set up on this server
	Text  Transport // nil: text messages are not set up
	// Domain is the right-hand side of Message-IDs (the sender's domain).
	Domain string
	Log    *slog.Logger
	Now    func() time.Time
	// Tries and Backoff are the retry policy of temporary failures;
	// defaults outreach.SendTries and outreach.Backoff.
	Tries   int
	Backoff func(try int) time.Duration
	// TriageURL is the link in the morning summary; SummaryAt its time of
	// day in the study's zone (default outreach.DefaultSummaryAt).
	TriageURL string
	SummaryAt outreach.Clock
}

// Handlers are the sender's job functions by kind, for the workers.
func (s *Sender) Handlers() map[string]db.JobFunc {
	return map[string]db.JobFunc{db.JobSendMessage: s.sendMessage, db.JobMorningSummary: s.morning}
}

func (s *Sender) now() time.Time {
	if s.Now != nil {
		return s.Now()
	}
	return time.Now()
}

func (s *Sender) log() *slog.Logger {
	if s.Log != nil {
		return s.Log
	}
	return slog.New(slog.DiscardHandler)
}

func (s *Sender) transport(ch followup.Channel) Transport {
	switch ch {
	case followup.ChannelEmail:
		return s.Email
	case followup.ChannelText:
		return s.Text
	}
	return nil
}

func (s *Sender) domain() string {
	if s.Domain != "" {
		return s.Domain
	}
	return "cohortdesk.invalid"
}

// sendMessage sends one queued message. Before the try it checks again what
// may have changed since the message was queued (the participant withdrew,
// opted out, or the quiet hours began: the message then waits for their
// end). Each try is recorded before it starts and its end after; a try whose
// start is recorded and whose end is not (the process died in between) makes
// the next try a resend with the same Message-ID or key, marked as such.
// Temporary failures are tried again after outreach.Backoff, up to
// outreach.SendTries tries, then the message fails; a permanent refusal makes
// it undeliverable. Either end is recorded on the case.
func (s *Sender) sendMessage(ctx context.Context, j db.Job, _ func(int64, int64) error) (string, error) {
	var p db.MessageJob
	if err := json.Unmarshal(j.Payload, &p); err != nil || p.MessageID == 0 {
		return "", db.Permanent(fmt.Errorf("message job payload %s: %v", j.Payload, err))
	}
	o, err := s.Store.OutgoingMessage(ctx, p.MessageID)
	if errors.Is(err, cohort.ErrNotFound) {
		return "", db.Permanent(fmt.Errorf("message %d does not exist", p.MessageID))
	}
	if err != nil {
		return "", err
	}
	if o.Status != outreach.Queued {
		return "message " + strconv.FormatInt(o.ID, 10) + " already " + o.Status.Label(), nil
	}
	fail := func(st outreach.Status, why string) (string, error) {
		if err := s.Store.MessageNotDelivered(ctx, o.ID, st, why); err != nil {
			return "", err
		}
		return st.Label() + ": " + why, nil
	}
	t := s.transport(o.Channel)
	if t == nil {
		return fail(outreach.Failed, o.Channel.Label()+" is not set up on this server")
	}
	if o.Withdrawn {
		return fail(outreach.Failed, "not sent: the participant withdrew after the message was queued")
	}
	now := s.now()
	at, held, err := outreach.Decide(o.Preferences, o.Contact, o.Channel, now, o.Location)
	var ve *cohort.ValidationError
	if errors.As(err, &ve) {
		return fail(outreach.Failed, "not sent: "+ve.Fields["channel"])
	}
	if err != nil {
		return "", err
	}
	if held {
		return "", db.Later(at, "held until the participant's quiet hours end")
	}
	tries, resend, ok, err := s.Store.BeginTry(ctx, o.ID)
	if err != nil {
		return "", err
	}
	if !ok {
		return "message " + strconv.FormatInt(o.ID, 10) + " ended meanwhile", nil
	}
	if resend {
		s.log().Warn("message sent again after a try whose end was not recorded", "message", o.ID, "try", tries)
	}
	out := Outgoing{Key: o.Key, MessageID: o.Key + "@" + s.domain(), To: o.Recipient, Subject: o.MessageContent.Subject, Body: o.Body}
	rec, err := t.Send(ctx, out)
	switch {
	case err == nil:
		st := outreach.Sent
		if rec.Delivered {
			st = outreach.Delivered
		}
		if err := s.Store.MessageSent(ctx, o.ID, st, rec.Detail, rec.Ref); err != nil {
			return "", err
		}
		return fmt.Sprintf("%s (try %d): %s", st.Label(), tries, rec.Detail), nil
	case permanentRefusal(err):
		return fail(outreach.Undeliverable, refusalDetail(err))
	}
	max := s.Tries
	if max <= 0 {
		max = outreach.SendTries
	}
	if tries >= max {
		return fail(outreach.Failed, fmt.Sprintf("gave up after %d tries: %s", tries, refusalDetail(err)))
	}
	if err := s.Store.MessageTemporary(ctx, o.ID, refusalDetail(err)); err != nil {
		return "", err
	}
	backoff := outreach.Backoff
	if s.Backoff != nil {
		backoff = s.Backoff
	}
	next := now.Add(backoff(tries))
	return "", db.Later(next, fmt.Sprintf("try %d of %d failed for now (%s); next try at %s", tries, max, refusalDetail(err), next.UTC().Format(time.RFC3339)))
}

func refusalDetail(err error) string {
	var r *Refusal
	if errors.As(err, &r) {
		return r.Detail
	}
	return err.Error()
}

// morning sends the morning summaries of the day (on working days, once per
// account and day), then queues its next run. Stranded messages (a sending
// job that died on its last attempt) are failed here too, so their cases
// show it.
func (s *Sender) morning(ctx context.Context, _ db.Job, _ func(int64, int64) error) (string, error) {
	if n, err := s.Store.ReconcileMessages(ctx); err != nil {
		return "", err
	} else if n > 0 {
		s.log().Warn("messages whose sending job stopped were marked failed", "count", n)
	}
	m, err := s.Store.MorningWork(ctx)
	if err != nil {
		return "", err
	}
	cal := m.Settings.Calendar()
	day := cal.DateOf(m.Now)
	sent, failed, putOff := 0, 0, 0
	if cal.IsWorkingDay(day) && s.Email != nil {
		for _, r := range m.Recipients {
			done, err := s.Store.MorningSummarySent(ctx, r.UserID, day)
			if err != nil {
				return "", err
			}
			if done {
				continue
			}
			subject, body := outreach.SummaryMail(r.Name, m.Settings.Name, day, m.Counts[r.UserID], s.TriageURL)
			key := fmt.Sprintf("summary-%d-%s", r.UserID, day)
			if _, err := s.Email.Send(ctx, Outgoing{Key: key, MessageID: key + "@" + s.domain(), To: r.Email, Subject: subject, Body: body}); err != nil {
				failed++
				if ref := (*Refusal)(nil); !errors.As(err, &ref) || !ref.Permanent {
					putOff++ // tried again this morning
				}
				s.log().Warn("morning summary not sent", "user", r.UserID, "err", err)
				continue
			}
			if err := s.Store.RecordMorningSummary(ctx, r.UserID, day); err != nil {
				return "", err
			}
			sent++
		}
	}
	at := s.SummaryAt
	if at == 0 {
		at = outreach.DefaultSummaryAt
	}
	next := outreach.NextSummaryRun(cal, m.Settings.Location(), m.Now, at, putOff > 0)
	if err := s.Store.EnsureMorningJob(ctx, next); err != nil {
		return "", err
	}
	return fmt.Sprintf("%d summaries sent, %d not (%d of them put off by the mail server, to try again); next run %s", sent, failed, putOff, next.Format(time.RFC3339)), nil
}

// Start queues the first morning-summary run (unless one waits) and fails
// the messages stranded by a worker that died; serve and the demo call it
// once at start-up.
func (s *Sender) Start(ctx context.Context, settings func(context.Context) (db.StudySettings, error)) error {
	if _, err := s.Store.ReconcileMessages(ctx); err != nil {
		return err
	}
	st, err := settings(ctx)
	if err != nil {
		return err
	}
	at := s.SummaryAt
	if at == 0 {
		at = outreach.DefaultSummaryAt
	}
	return s.Store.EnsureMorningJob(ctx, outreach.NextMorning(st.Calendar(), st.Location(), s.now(), at))
}

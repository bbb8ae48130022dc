package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"log/slog"
	"net/mail"
	"strings"

	"cohortdesk/cohort/outreach"
	"cohortdesk/db"
	"cohortdesk/web"
	sender "cohortdesk/web/outreach"
)

// outreachConfig is how this instance sends messages to participants: e-mail
// through an SMTP server, text messages through an HTTPS gateway, or both
// written to a folder instead (the demo). The README lists every setting.
type outreachConfig struct {
	SMTP         sender.SMTPConfig
	TextURL      string
	TextToken    string
	TextBody     string
	ReceiptToken string
	OutboxDir    string
	PublicURL    string
	SummaryAt    string
	// The fields of the text gateway's answer, and the authority that
	// signed its certificate (sender.GatewayConfig).
	TextStatusField, TextRefField, TextDelivered, TextCAFile string
}

func (c *outreachConfig) bind(fs *flag.FlagSet, getenv func(string) string) {
	fs.StringVar(&c.SMTP.Host, "smtp-host", getenv("COHORTDESK_SMTP_HOST"), "mail server for e-mail to participants and the morning summary; empty: no e-mail (env COHORTDESK_SMTP_HOST)")
	fs.IntVar(&c.SMTP.Port, "smtp-port", envInt(getenv, "COHORTDESK_SMTP_PORT", 0), "mail server port; 0: 587, or 465 with -smtp-security tls (env COHORTDESK_SMTP_PORT)")
	fs.StringVar(&c.SMTP.Security, "smtp-security", envOr(getenv, "COHORTDESK_SMTP_SECURITY", sender.SecuritySTARTTLS), "starttls, tls (implicit) or none (env COHORTDESK_SMTP_SECURITY)")
	fs.StringVar(&c.SMTP.Username, "smtp-user", getenv("COHORTDESK_SMTP_USER"), "mail server user name; empty: no sign-in (env COHORTDESK_SMTP_USER)")
	fs.StringVar(&c.SMTP.Password, "smtp-password", getenv("COHORTDESK_SMTP_PASSWORD"), "mail server password (env COHORTDESK_SMTP_PASSWORD)")
	fs.StringVar(&c.SMTP.From, "smtp-from", getenv("COHORTDESK_SMTP_FROM"), `sender of e-mail, e.g. "Study team <team@example.org>" (env COHORTDESK_SMTP_FROM)`)
	fs.StringVar(&c.SMTP.CAFile, "smtp-ca-file", getenv("COHORTDESK_SMTP_CA_FILE"), "PEM file of the authority that signed the mail server's certificate; empty: the system's (env COHORTDESK_SMTP_CA_FILE)")
	fs.StringVar(&c.TextURL, "text-url", getenv("COHORTDESK_TEXT_URL"), "HTTPS address of the text-message gateway; empty: no text messages (env COHORTDESK_TEXT_URL)")
	fs.StringVar(&c.TextToken, "text-token", getenv("COHORTDESK_TEXT_TOKEN"), "bearer token sent to the gateway (env COHORTDESK_TEXT_TOKEN)")
	fs.StringVar(&c.TextBody, "text-body", getenv("COHORTDESK_TEXT_BODY"), "JSON body template of the gateway with {{to}}, {{body}} and {{key}} (env COHORTDESK_TEXT_BODY)")
	fs.StringVar(&c.TextStatusField, "text-status-field", getenv("COHORTDESK_TEXT_STATUS_FIELD"), `field of the gateway's JSON answer holding the message's state; empty: "status" (env COHORTDESK_TEXT_STATUS_FIELD)`)
	fs.StringVar(&c.TextRefField, "text-ref-field", getenv("COHORTDESK_TEXT_REF_FIELD"), `field of the gateway's JSON answer holding its reference for the message; empty: "id" (env COHORTDESK_TEXT_REF_FIELD)`)
	fs.StringVar(&c.TextDelivered, "text-delivered", getenv("COHORTDESK_TEXT_DELIVERED"), `comma-separated states of that field that mean the message arrived; empty: "delivered" (env COHORTDESK_TEXT_DELIVERED)`)
	fs.StringVar(&c.TextCAFile, "text-ca-file", getenv("COHORTDESK_TEXT_CA_FILE"), "PEM file of the authority that signed the gateway's certificate; empty: the system's (env COHORTDESK_TEXT_CA_FILE)")
	fs.StringVar(&c.ReceiptToken, "text-receipt-token", getenv("COHORTDESK_TEXT_RECEIPT_TOKEN"), "bearer token the gateway sends with delivery receipts to /outreach/receipts; empty: receipts refused (env COHORTDESK_TEXT_RECEIPT_TOKEN)")
	fs.StringVar(&c.OutboxDir, "outbox-dir", getenv("COHORTDESK_OUTBOX_DIR"), "write e-mails and text messages to this folder instead of sending them (env COHORTDESK_OUTBOX_DIR)")
	fs.StringVar(&c.PublicURL, "public-url", getenv("COHORTDESK_PUBLIC_URL"), "address staff open cohortdesk at, for the link in the morning summary (env COHORTDESK_PUBLIC_URL)")
	fs.StringVar(&c.SummaryAt, "summary-at", envOr(getenv, "COHORTDESK_SUMMARY_AT", outreach.DefaultSummaryAt.String()), "time of day of the morning summary, study time zone (env COHORTDESK_SUMMARY_AT)")
}

func (c *outreachConfig) validate() error {
	if c.SMTP.Host != "" {
		if err := c.SMTP.Check(); err != nil {
			return fmt.Errorf("config: %w", err)
		}
	}
	if c.OutboxDir != "" && c.SMTP.From != "" {
		if _, err := mail.ParseAddress(c.SMTP.From); err != nil {
			return fmt.Errorf("config: -smtp-from %q is not an address", c.SMTP.From)
		}
	}
	if c.TextURL != "" {
		if _, err := sender.NewGateway(c.gateway(), nil); err != nil {
			return fmt.Errorf("config: %w", err)
		}
	}
	if at, err := outreach.ParseClock(c.SummaryAt); err != nil || at == 0 {
		return fmt.Errorf("config: -summary-at %q: want a time of day such as 07:00 (not midnight)", c.SummaryAt)
	}
	if c.PublicURL != "" && !strings.HasPrefix(c.PublicURL, "http://") && !strings.HasPrefix(c.PublicURL, "https://") {
		return fmt.Errorf("config: -public-url %q: want http:// or https://", c.PublicURL)
	}
	return nil
}

// gateway is the text gateway's configuration from the settings.
func (c *outreachConfig) gateway() sender.GatewayConfig {
	g := sender.GatewayConfig{URL: c.TextURL, Token: c.TextToken, Body: c.TextBody,
		StatusField: strings.TrimSpace(c.TextStatusField), RefField: strings.TrimSpace(c.TextRefField), CAFile: c.TextCAFile}
	for _, d := range strings.Split(c.TextDelivered, ",") {
		if d = strings.TrimSpace(d); d != "" {
			g.Delivered = append(g.Delivered, d)
		}
	}
	return g
}

// build makes the sender of this instance's jobs and says what the web
// pages may offer. A folder, when set, takes both e-mail and text messages.
func (c *outreachConfig) build(store *db.Store, log *slog.Logger) (*sender.Sender, web.OutreachConfig, error) {
	at, _ := outreach.ParseClock(c.SummaryAt)
	s := &sender.Sender{Store: store, Log: log, SummaryAt: at}
	if c.PublicURL != "" {
		s.TriageURL = strings.TrimSuffix(c.PublicURL, "/") + "/triage"
	}
	from := c.SMTP.From
	if from == "" {
		from = "Study team <study-team@cohortdesk.invalid>"
	}
	if addr, err := mail.ParseAddress(from); err == nil {
		s.Domain = addr.Address[strings.LastIndex(addr.Address, "@")+1:]
	}
	switch {
	case c.OutboxDir != "":
		f, err := sender.NewFolder(c.OutboxDir, from)
		if err != nil {
			return nil, web.OutreachConfig{}, err
		}
		s.Email, s.Text = f, f
	default:
		if c.SMTP.Host != "" {
			m, err := sender.NewSMTP(c.SMTP)
			if err != nil {
				return nil, web.OutreachConfig{}, err
			}
			s.Email = m
		}
		if c.TextURL != "" {
			g, err := sender.NewGateway(c.gateway(), nil)
			if err != nil {
				return nil, web.OutreachConfig{}, err
			}
			s.Text = g
		}
	}
	return s, web.OutreachConfig{Email: s.Email != nil, Text: s.Text != nil, ReceiptToken: c.ReceiptToken}, nil
}

// startOutreach saves the default templates where none exist, fails the
// messages a dead worker stranded and queues the first morning summary.
func startOutreach(ctx context.Context, store *db.Store, s *sender.Sender) error {
	if err := store.EnsureDefaultTemplates(ctx); err != nil {
		return err
	}
	if err := s.Start(ctx, store.StudySettings); err != nil {
		return errors.Join(errors.New("outreach: start"), err)
	}
	return nil
}

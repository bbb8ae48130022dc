package outreach

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"net/mail"
	"os"
	"strings"
	"sync"
	"time"

	gomail "github.com/wneessen/go-mail"
)

// SMTP security modes.
const (
	SecuritySTARTTLS = "starttls" // plain connection upgraded with STARTTLS, which the server must offer
	SecurityTLS      = "tls"      // implicit TLS from the first byte (often port 465)
	SecurityNone     = "none"     // no encryption: a relay on the same machine or network only
)

// SMTPConfig is how to reach the mail server.
type SMTPConfig struct {
	Host     string
	Port     int    // 0: 587 for starttls and none, 465 for tls
	Security string // SecuritySTARTTLS (default), SecurityTLS or SecurityNone
	Username string // empty: no authentication
	Password string
	From     string        // the sender, "Study team <team@example.org>" or an address
	CAFile   string        // PEM file of the authority that signed the server's certificate; empty: the system's
	Timeout  time.Duration // per connection and command; 0: 30 s
}

// Check refuses a configuration that cannot work, naming the setting.
func (c SMTPConfig) Check() error {
	if c.Host == "" {
		return errors.New("outreach: SMTP host is empty (COHORTDESK_SMTP_HOST)")
	}
	switch c.Security {
	case "", SecuritySTARTTLS, SecurityTLS, SecurityNone:
	default:
		return fmt.Errorf("outreach: SMTP security %q: want starttls, tls or none (COHORTDESK_SMTP_SECURITY)", c.Security)
	}
	if _, err := mail.ParseAddress(c.From); err != nil {
		return fmt.Errorf("outreach: SMTP sender %q is not an address (COHORTDESK_SMTP_FROM): %v", c.From, err)
	}
	if (c.Username == "") != (c.Password == "") {
		return errors.New("outreach: give both the SMTP user and password, or neither (COHORTDESK_SMTP_USER, COHORTDESK_SMTP_PASSWORD)")
	}
	if c.Port < 0 || c.Port > 65535 {
		return fmt.Errorf("outreach: SMTP port %d", c.Port)
	}
	return nil
}

// SMTP sends e-mail through one mail server, keeping one connection open
// between messages (and opening it again when the server closed it).
type SMTP struct {
	cfg    SMTPConfig
	from   *mail.Address
	domain string
	opts   []gomail.Option

	mu      sync.Mutex
	client  *gomail.Client
	lastUse time.Time
}

// idleClose is how long an unused connection is kept.
const idleClose = 30 * time.Second

// NewSMTP checks the configuration and prepares the client; nothing is
// dialled until the first message.
func NewSMTP(cfg SMTPConfig) (*SMTP, error) {
	if err := cfg.Check(); err != nil {
		return nil, err
	}
	if cfg.Security == "" {
		cfg.Security = SecuritySTARTTLS
	}
	if cfg.Timeout <= 0 {
		cfg.Timeout = 30 * time.Second
	}
	from, _ := mail.ParseAddress(cfg.From)
	s := &SMTP{cfg: cfg, from: from, domain: from.Address[strings.LastIndex(from.Address, "@")+1:]}
	tlsConf := &tls.Config{ServerName: cfg.Host, MinVersion: tls.VersionTLS12}
	if cfg.CAFile != "" {
		pool, err := caPool(cfg.CAFile, "SMTP")
		if err != nil {
			return nil, err
		}
		tlsConf.RootCAs = pool
	}
	s.opts = []gomail.Option{gomail.WithTimeout(cfg.Timeout), gomail.WithTLSConfig(tlsConf), gomail.WithHELO(s.domain)}
	port := cfg.Port
	switch cfg.Security {
	case SecurityTLS:
		if port == 0 {
			port = 465
		}
		s.opts = append(s.opts, gomail.WithSSL())
	case SecurityNone:
		s.opts = append(s.opts, gomail.WithTLSPolicy(gomail.NoTLS))
	default:
		s.opts = append(s.opts, gomail.WithTLSPolicy(gomail.TLSMandatory))
	}
	if port == 0 {
		port = 587
	}
	s.opts = append(s.opts, gomail.WithPort(port))
	if cfg.Username != "" {
		s.opts = append(s.opts, gomail.WithSMTPAuth(gomail.SMTPAuthAutoDiscover), gomail.WithUsername(cfg.Username), gomail.WithPassword(cfg.Password))
	}
	return s, nil
}

// MessageIDFor is the Message-ID of the message with idempotency key key:
// the key at the sender's domain, the same on every try.
func (s *SMTP) MessageIDFor(key string) string { return key + "@" + s.domain }

// Message builds the e-mail of m as it goes on the wire.
func (s *SMTP) Message(m Outgoing) (*gomail.Msg, error) {
	msg := gomail.NewMsg()
	if err := msg.FromFormat(s.from.Name, s.from.Address); err != nil {
		return nil, &Refusal{Permanent: true, Detail: "sender: " + err.Error()}
	}
	if err := msg.To(m.To); err != nil {
		return nil, &Refusal{Permanent: true, Detail: fmt.Sprintf("the address %q is not an e-mail address", m.To)}
	}
	msg.Subject(m.Subject)
	id := m.MessageID
	if id == "" {
		id = s.MessageIDFor(m.Key)
	}
	msg.SetMessageIDWithValue(id)
	msg.SetDate()
	// Our own name, not the mail library's, in the client headers.
	msg.SetUserAgent("cohortdesk")
	msg.SetBodyString(gomail.TypeTextPlain, m.Body)
	return msg, nil
}

// Send hands one message to the server. A 5xx answer is a permanent
// refusal; a 4xx answer, a connection that fails or a timeout is temporary.
func (s *SMTP) Send(ctx context.Context, m Outgoing) (Receipt, error) {
	msg, err := s.Message(m)
	if err != nil {
		return Receipt{}, err
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.client != nil && time.Since(s.lastUse) > idleClose {
		s.closeLocked()
	}
	reused := s.client != nil
	if err := s.dialLocked(ctx); err != nil {
		return Receipt{}, classify(err)
	}
	err = s.client.Send(msg)
	var se *gomail.SendError
	if err != nil && reused && errors.As(err, &se) && se.Reason == gomail.ErrConnCheck {
		// The server closed the idle connection before the message began:
		// nothing was handed over, so open a new one and send it now.
		s.closeLocked()
		if err := s.dialLocked(ctx); err != nil {
			return Receipt{}, classify(err)
		}
		err = s.client.Send(msg)
	}
	if err != nil {
		s.closeLocked()
		return Receipt{}, classify(err)
	}
	s.lastUse = time.Now()
	return Receipt{Detail: msg.ServerResponse()}, nil
}

func (s *SMTP) dialLocked(ctx context.Context) error {
	if s.client != nil {
		return nil
	}
	c, err := gomail.NewClient(s.cfg.Host, s.opts...)
	if err != nil {
		return err
	}
	if err := c.DialWithContext(ctx); err != nil {
		return err
	}
	s.client, s.lastUse = c, time.Now()
	return nil
}

func (s *SMTP) closeLocked() {
	if s.client != nil {
		_ = s.client.Close()
		s.client = nil
	}
}

// Close ends the open connection, if any.
func (s *SMTP) Close() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.closeLocked()
	return nil
}

// classify turns a send error into a Refusal: permanent only for an SMTP
// 5xx answer to the message itself.
func classify(err error) error {
	var se *gomail.SendError
	if errors.As(err, &se) {
		code := se.ErrorCode()
		detail := strings.TrimSpace(se.Error())
		if code >= 500 && code < 600 && se.Reason != gomail.ErrConnCheck {
			return &Refusal{Permanent: true, Detail: detail}
		}
		return &Refusal{Detail: detail}
	}
	return &Refusal{Detail: err.Error()}
}

// caPool reads a PEM file of the authorities that signed a server's
// certificate (the mail server's or the text gateway's, named by what).
func caPool(file, what string) (*x509.CertPool, error) {
	pem, err := os.ReadFile(file)
	if err != nil {
		return nil, fmt.Errorf("outreach: %s CA file: %w", what, err)
	}
	pool := x509.NewCertPool()
	if !pool.AppendCertsFromPEM(pem) {
		return nil, fmt.Errorf("outreach: %s CA file %s holds no PEM certificate", what, file)
	}
	return pool, nil
}

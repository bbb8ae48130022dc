package outreach

import (
	"bytes"
	"context"
	"crypto/tls"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"strings"
	"time"
)

// GatewayConfig is how to reach a text-message gateway: any provider that
// takes an HTTPS POST with a JSON body. The body is written by the template,
// whose placeholders {{to}}, {{body}} and {{key}} are replaced by JSON
// strings (quotes included), so the template decides the field names.
type GatewayConfig struct {
	URL   string // https://...
	Token string // sent as "Authorization: Bearer <token>"; empty: none
	Body  string // JSON body template; empty: DefaultGatewayBody
	// StatusField and RefField name the fields of the gateway's JSON answer
	// that hold the message's state and the gateway's reference; empty:
	// "status" and "id".
	StatusField, RefField string
	// Delivered lists the values of StatusField that mean the message
	// arrived; empty: "delivered".
	Delivered []string
	// CAFile is a PEM file of the authority that signed the gateway's
	// certificate; empty: the system's.
	CAFile  string
	Timeout time.Duration // 0: 30 s
}

// DefaultGatewayBody is the body template when none is configured.
const DefaultGatewayBody = `{"to": {{to}}, "text": {{body}}, "reference": {{key}}}`

// Gateway sends text messages through an HTTPS gateway.
type Gateway struct {
	cfg    GatewayConfig
	client *http.Client
}

// NewGateway checks the configuration (an https URL, a body template that
// makes valid JSON holding the three placeholders) and returns the gateway.
// client nil means a client with the configured timeout.
func NewGateway(cfg GatewayConfig, client *http.Client) (*Gateway, error) {
	u, err := url.Parse(cfg.URL)
	if err != nil || u.Scheme != "https" || u.Host == "" {
		return nil, fmt.Errorf("outreach: text gateway URL %q: want https://host/path (COHORTDESK_TEXT_URL)", cfg.URL)
	}
	if cfg.Body == "" {
		cfg.Body = DefaultGatewayBody
	}
	for _, ph := range []string{"{{to}}", "{{body}}", "{{key}}"} {
		if !strings.Contains(cfg.Body, ph) {
			return nil, fmt.Errorf("outreach: text gateway body template lacks %s (COHORTDESK_TEXT_BODY)", ph)
		}
	}
	if b := gatewayBody(cfg.Body, Outgoing{To: "+15550100", Body: "a \"test\"\nline", Key: "k"}); !json.Valid(b) {
		return nil, fmt.Errorf("outreach: text gateway body template does not make valid JSON: %s (COHORTDESK_TEXT_BODY)", b)
	}
	if cfg.StatusField == "" {
		cfg.StatusField = "status"
	}
	if cfg.RefField == "" {
		cfg.RefField = "id"
	}
	if len(cfg.Delivered) == 0 {
		cfg.Delivered = []string{"delivered"}
	}
	if cfg.Timeout <= 0 {
		cfg.Timeout = 30 * time.Second
	}
	if client == nil {
		client = &http.Client{Timeout: cfg.Timeout}
		if cfg.CAFile != "" {
			pool, err := caPool(cfg.CAFile, "text gateway")
			if err != nil {
				return nil, err
			}
			t := http.DefaultTransport.(*http.Transport).Clone()
			t.TLSClientConfig = &tls.Config{RootCAs: pool, MinVersion: tls.VersionTLS12}
			client.Transport = t
		}
	}
	return &Gateway{cfg: cfg, client: client}, nil
}

// gatewayBody fills the body template with m's values as JSON strings.
func gatewayBody(tpl string, m Outgoing) []byte {
	q := func(s string) string { b, _ := json.Marshal(s); return string(b) }
	r := strings.NewReplacer("{{to}}", q(m.To), "{{body}}", q(m.Body), "{{key}}", q(m.Key))
	return []byte(r.Replace(tpl))
}

// Send posts one message. The idempotency key goes in the body (where the
// template puts it) and in the Idempotency-Key header, so a gateway that
// honours either sends a retried message once. A 2xx answer is taken (and
// delivered when the answer's status field says so); 408, 429 and 5xx
// answers and failed connections are temporary; other 4xx answers refuse the
// message for good (a number the gateway will not take).
func (g *Gateway) Send(ctx context.Context, m Outgoing) (Receipt, error) {
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, g.cfg.URL, bytes.NewReader(gatewayBody(g.cfg.Body, m)))
	if err != nil {
		return Receipt{}, &Refusal{Detail: err.Error()}
	}
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set("Idempotency-Key", m.Key)
	if g.cfg.Token != "" {
		req.Header.Set("Authorization", "Bearer "+g.cfg.Token)
	}
	res, err := g.client.Do(req)
	if err != nil {
		return Receipt{}, &Refusal{Detail: err.Error()}
	}
	defer res.Body.Close()
	raw, _ := io.ReadAll(io.LimitReader(res.Body, 64<<10))
	detail := fmt.Sprintf("%d %s", res.StatusCode, strings.TrimSpace(string(raw)))
	if len(detail) > 300 {
		detail = detail[:300]
	}
	switch {
	case res.StatusCode >= 200 && res.StatusCode < 300:
	case res.StatusCode == http.StatusRequestTimeout || res.StatusCode == http.StatusTooManyRequests || res.StatusCode >= 500:
		return Receipt{}, &Refusal{Detail: detail}
	default:
		return Receipt{}, &Refusal{Permanent: true, Detail: detail}
	}
	r := Receipt{Detail: detail}
	var answer map[string]any
	if json.Unmarshal(raw, &answer) == nil {
		if s, ok := answer[g.cfg.StatusField].(string); ok {
			for _, d := range g.cfg.Delivered {
				if strings.EqualFold(s, d) {
					r.Delivered = true
				}
			}
		}
		switch v := answer[g.cfg.RefField].(type) {
		case string:
			r.Ref = v
		case float64:
			r.Ref = fmt.Sprint(v)
		}
	}
	return r, nil
}

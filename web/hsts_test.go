package web

import (
	"crypto/tls"
	"net/http"
	"net/http/httptest"
	"net/netip"
	"testing"

	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// TestStrictTransportSecurity (issue 14, finding 13): the header is sent when
// the server speaks TLS and when it sits behind a trusted proxy, and not over
// plain HTTP from an untrusted peer.
func TestStrictTransportSecurity(t *testing.T) {
	pool := dbtest.Pool(t)
	store := db.New(pool, nil)
	get := func(ts *httptest.Server) string {
		t.Helper()
		c := ts.Client()
		c.CheckRedirect = func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }
		if tr, ok := c.Transport.(*http.Transport); ok && tr.TLSClientConfig == nil {
			tr.TLSClientConfig = &tls.Config{}
		}
		res, err := c.Get(ts.URL + "/signin")
		if err != nil {
			t.Fatal(err)
		}
		res.Body.Close()
		return res.Header.Get("Strict-Transport-Security")
	}

	plain := httptest.NewServer(New(Config{Store: store, Pool: pool, Password: credential.TestParams}).Handler())
	defer plain.Close()
	if h := get(plain); h != "" {
		t.Errorf("plain HTTP, no proxy: Strict-Transport-Security %q, want none", h)
	}

	tlsSrv := httptest.NewTLSServer(New(Config{Store: store, Pool: pool, Password: credential.TestParams}).Handler())
	defer tlsSrv.Close()
	if h := get(tlsSrv); h != strictTransportSecurity {
		t.Errorf("TLS: Strict-Transport-Security %q, want %q", h, strictTransportSecurity)
	}

	proxied := httptest.NewServer(New(Config{Store: store, Pool: pool, Password: credential.TestParams,
		TrustedProxies: []netip.Prefix{netip.MustParsePrefix("127.0.0.0/8"), netip.MustParsePrefix("::1/128")}}).Handler())
	defer proxied.Close()
	if h := get(proxied); h != strictTransportSecurity {
		t.Errorf("behind a trusted proxy: Strict-Transport-Security %q, want %q", h, strictTransportSecurity)
	}
}

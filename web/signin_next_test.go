package web

import (
	"net/http"
	"net/url"
	"strings"
	"testing"
)

// openRedirectPayloads are known open-redirect payloads (collected from
// common practice: the forms browsers normalise into another host).
var openRedirectPayloads = []string{
	"//evil.example",
	"///evil.example",
	"////evil.example/",
	"/\\evil.example",
	"\\\\evil.example",
	"\\/evil.example",
	"/\t/evil.example",
	"/\n/evil.example",
	"/\r\n/evil.example",
	"/%09/evil.example",
	"/%0a/evil.example",
	"/%0d%0a/evil.example",
	"/%2f/evil.example",
	"/%2F%2Fevil.example",
	"/%5cevil.example",
	"/%5c%5cevil.example",
	"/\x00/evil.example",
	"/\x7f/evil.example",
	"/\u2028/evil.example",
	"https://evil.example",
	"http:evil.example",
	"http:/evil.example",
	"HTTPS://evil.example/",
	"javascript:alert(1)",
	"JaVaScRiPt:alert(1)",
	"data:text/html,<script>alert(1)</script>",
	"evil.example",
	"@evil.example",
	" //evil.example",
	"\t//evil.example",
	".//evil.example",
	"%2f%2fevil.example",
	"https:/\\evil.example",
	"/\\/evil.example/",
	"//evil.example@good.example",
	"/signin",
	"/signin?next=//evil.example",
}

// TestSafeNextRefusesOpenRedirects (issue 14, finding 11): every payload is
// refused and becomes "/", while ordinary paths of the site pass unchanged.
func TestSafeNextRefusesOpenRedirects(t *testing.T) {
	for _, p := range openRedirectPayloads {
		if got := safeNext(p); got != "/" {
			t.Errorf("safeNext(%q) = %q, want /", p, got)
		}
	}
	for _, p := range []string{"/", "/participants?site=1", "/cases/12", "/participants?q=a%20b", "/progress#top", "/a/b?c=//d"} {
		if got := safeNext(p); got != p {
			t.Errorf("safeNext(%q) = %q, want it unchanged", p, got)
		}
	}
}

// TestSignInRedirectStaysOnSite: through the real form, a payload in next
// sends the user to the start page.
func TestSignInRedirectStaysOnSite(t *testing.T) {
	a := newApp(t)
	for _, p := range []string{"/%09/evil.example", "/\t/evil.example", "//evil.example"} {
		res := a.postForm(a.client(), "/signin", url.Values{"email": {"coordinator@example.org"}, "password": {testPassword}, "next": {p}})
		if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/" {
			t.Errorf("next %q: status %d, location %q, want / ", p, res.StatusCode, res.Header.Get("Location"))
		}
	}
	res := a.postForm(a.client(), "/signin", url.Values{"email": {"coordinator@example.org"}, "password": {testPassword}, "next": {"/cases?state=open"}})
	if loc := res.Header.Get("Location"); loc != "/cases?state=open" {
		t.Errorf("a path of the site: location %q", loc)
	}
	_, body := a.get(a.client(), "/signin?next="+url.QueryEscape("/\t/evil.example"))
	if strings.Contains(body, "evil.example") {
		t.Error("the sign-in form carries the payload on")
	}
}

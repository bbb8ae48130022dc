package web

import (
	"fmt"
	"io"
	"net"
	"net/http"
	"net/url"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// TestHeadSendsNoBody asks for a page with HEAD over a plain connection and
// reads everything the server sends: the status line and headers of the
// page, and not one byte of it.
func TestHeadSendsNoBody(t *testing.T) {
	a := newApp(t)
	c := a.signIn(cohort.Coordinator)
	u, _ := url.Parse(a.ts.URL)
	var cookies []string
	for _, ck := range c.Jar.Cookies(u) {
		cookies = append(cookies, ck.Name+"="+ck.Value)
	}
	get, page := a.get(c, "/participants")
	if get.StatusCode != http.StatusOK || len(page) == 0 {
		t.Fatalf("GET /participants: %d, %d bytes", get.StatusCode, len(page))
	}
	conn, err := net.Dial("tcp", u.Host)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	fmt.Fprintf(conn, "HEAD /participants HTTP/1.1\r\nHost: %s\r\nCookie: %s\r\nConnection: close\r\n\r\n", u.Host, strings.Join(cookies, "; "))
	raw, err := io.ReadAll(conn)
	if err != nil {
		t.Fatal(err)
	}
	head, rest, ok := strings.Cut(string(raw), "\r\n\r\n")
	if !ok || !strings.HasPrefix(head, "HTTP/1.1 200") || !strings.Contains(head, "text/html") {
		t.Fatalf("HEAD /participants answered %q", head)
	}
	if rest != "" {
		t.Errorf("HEAD /participants sent %d bytes of body", len(rest))
	}
}

package web

import (
	"net"
	"net/http"
	"net/netip"
)

// strictTransportSecurity tells browsers to use only HTTPS for this host for
// a year, subdomains included (RFC 6797; the value is the one OWASP's HTTP
// Strict Transport Security cheat sheet recommends, from memory).
const strictTransportSecurity = "max-age=31536000; includeSubDomains"

// withHSTS sends Strict-Transport-Security on answers that reach the browser
// over HTTPS: when this server speaks TLS itself, or when the request came
// through a trusted reverse proxy (which, like the Secure cookies, the
// configuration takes to terminate TLS). Browsers ignore the header over plain
// HTTP (RFC 6797 section 8.1), so it is not sent there.
func (s *Server) withHSTS(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if r.TLS != nil || s.fromTrustedProxy(r) {
			w.Header().Set("Strict-Transport-Security", strictTransportSecurity)
		}
		next.ServeHTTP(w, r)
	})
}

// fromTrustedProxy reports whether the connection's peer is a trusted proxy.
func (s *Server) fromTrustedProxy(r *http.Request) bool {
	if len(s.trustedProxies) == 0 {
		return false
	}
	host, _, err := net.SplitHostPort(r.RemoteAddr)
	if err != nil {
		host = r.RemoteAddr
	}
	a, err := netip.ParseAddr(host)
	return err == nil && s.trusted(a)
}

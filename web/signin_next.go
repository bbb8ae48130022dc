package web

import (
	"net/url"
	"strings"
)

// safeNext keeps the redirect after sign-in on this site: it returns next when
// it is a path of this site, else "/". Browsers are lenient with what they are
// told to load: they drop tabs and line breaks anywhere in a URL, read a
// backslash as a slash, and take "//host" as another host, so "/\t/evil", "/\\evil"
// and "//evil" all leave the site. Accepted is only an absolute path that
// starts with one slash followed by something other than a slash or
// backslash, with no control character, no backslash, no scheme, host or
// user anywhere, and the same after one more round of percent-decoding (so a
// decoder down the line cannot make it one). OWASP's Unvalidated Redirects and
// Forwards cheat sheet recommends this allow-list shape (from memory).
func safeNext(next string) string {
	if !sitePath(next) {
		return "/"
	}
	if dec, err := url.PathUnescape(next); err != nil || !sitePath(dec) {
		return "/"
	}
	if next == "/signin" || strings.HasPrefix(next, "/signin?") || strings.HasPrefix(next, "/signin/") {
		return "/"
	}
	return next
}

// sitePath reports whether p is a plain absolute path (with optional query)
// on this site.
func sitePath(p string) bool {
	if len(p) < 1 || len(p) > 2048 || p[0] != '/' {
		return false
	}
	if len(p) > 1 && (p[1] == '/' || p[1] == '\\') {
		return false
	}
	for _, r := range p {
		if r < 0x20 || r == 0x7f || r == '\\' || (r >= 0x80 && r <= 0x9f) || r == '\u2028' || r == '\u2029' {
			return false
		}
	}
	u, err := url.Parse(p)
	if err != nil || u.Scheme != "" || u.Host != "" || u.User != nil || u.Opaque != "" {
		return false
	}
	return strings.HasPrefix(u.Path, "/") && !strings.HasPrefix(u.Path, "//")
}

package web

import (
	"crypto/hmac"
	"crypto/rand"
	"crypto/sha256"
	"encoding/base64"
	"encoding/hex"
	"net/http"
	"strings"

	"cohortdesk/db"
)

// deviceCookie marks a browser in which an account has signed in before
// (OWASP's "device cookie" defence against lockout abuse, from memory). It
// holds a random device id and a MAC over the id and the account's e-mail
// address, keyed from the deployment secret, so it cannot be made for an
// account without that secret, and it is worth nothing for another account.
// Attempts from such a browser count against the device's own throttle key
// and not against the account's or the address's, so an attacker who
// exhausts those does not lock the account's owner out of their usual
// browser. Without a deployment secret there are no device cookies.
const deviceCookie = "cohortdesk_device"

const deviceCookieAge = 180 * 24 * 60 * 60 // seconds

func (s *Server) deviceKey() []byte {
	if len(s.secret) == 0 {
		return nil
	}
	m := hmac.New(sha256.New, s.secret)
	m.Write([]byte("cohortdesk trusted-device cookie v1"))
	return m.Sum(nil)
}

func (s *Server) deviceMAC(key, id []byte, email string) []byte {
	m := hmac.New(sha256.New, key)
	m.Write(id)
	m.Write([]byte{0})
	m.Write([]byte(strings.ToLower(email)))
	return m.Sum(nil)[:16]
}

// deviceFor returns the device id of the request's device cookie when the
// cookie was issued for email.
func (s *Server) deviceFor(r *http.Request, email string) (string, bool) {
	key := s.deviceKey()
	c, err := r.Cookie(deviceCookie)
	if key == nil || err != nil {
		return "", false
	}
	raw, err := base64.RawURLEncoding.DecodeString(c.Value)
	if err != nil || len(raw) != 12+16 {
		return "", false
	}
	id, mac := raw[:12], raw[12:]
	if !hmac.Equal(mac, s.deviceMAC(key, id, email)) {
		return "", false
	}
	return hex.EncodeToString(id), true
}

// trustDevice gives the browser a device cookie for u after a complete
// sign-in, keeping the one it has for u.
func (s *Server) trustDevice(w http.ResponseWriter, r *http.Request, u db.User) {
	key := s.deviceKey()
	if key == nil {
		return
	}
	if _, ok := s.deviceFor(r, u.Email); ok {
		return
	}
	id := make([]byte, 12)
	_, _ = rand.Read(id)
	http.SetCookie(w, &http.Cookie{
		Name:     deviceCookie,
		Value:    base64.RawURLEncoding.EncodeToString(append(id, s.deviceMAC(key, id, u.Email)...)),
		Path:     "/signin",
		MaxAge:   deviceCookieAge,
		HttpOnly: true,
		Secure:   s.sessions.Cookie.Secure,
		SameSite: http.SameSiteStrictMode,
	})
}

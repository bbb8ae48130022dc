package web

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net/http"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/views"
)

type signInStore interface {
	UserForSignIn(ctx context.Context, email string) (db.User, error)
	AdmitAttempt(ctx context.Context, keys []db.ThrottleKey) (db.Admission, error)
	RefundAttempt(ctx context.Context, keys []db.ThrottleKey) error
	CountFailure(ctx context.Context, keys []db.ThrottleKey) error
	UndoAttempt(ctx context.Context, adm db.Admission) error
	ClearThrottle(ctx context.Context, keys ...string) error
	RecordSignInFailure(ctx context.Context, account, addr, requestID, reason string) error
	RecordSignIn(ctx context.Context, a cohort.Actor) error
	Audit(ctx context.Context, a cohort.Actor, action, objType, objID string, old, new any) error
}

// maxEmailLen is the longest e-mail address accepted anywhere (cohort.MaxEmailLen).
const maxEmailLen = cohort.MaxEmailLen

// maxPasswordLen bounds what is hashed (credential.CheckPolicy allows 512
// bytes for new passwords; sign-in allows a little more so an old one still
// works).
const maxPasswordLen = 1024

// The one message for every failed sign-in, so nobody learns whether an account
// exists.
const (
	msgSignInFailed    = "Sign-in failed. Check the e-mail address and password."
	msgSignInThrottled = "Too many failed attempts. Sign-in is paused for this account or this computer; try again in %s."
	msgSignInBusy      = "The server is busy with other sign-ins. Nothing was tried; sign in again in a moment."
)

// dummyHash is verified against when the account does not exist, so a missing
// account takes as long as a wrong password.
func (s *Server) dummyHash() string {
	s.dummyOnce.Do(func() { s.dummy, _ = credential.Hash("not a real password, never matches", s.pwParams) })
	return s.dummy
}

func (s *Server) signInForm(w http.ResponseWriter, r *http.Request) error {
	if _, ok := s.currentUser(r); ok {
		http.Redirect(w, r, "/", http.StatusSeeOther)
		return nil
	}
	return s.ok(w, r, views.SignIn(views.SignInModel{Assets: s.assets, Next: safeNext(r.URL.Query().Get("next")), Demo: s.demoNote}))
}

// signInKeys are what an attempt counts against. From a browser that signed
// in to this account before (a trusted-device cookie), only that device's own
// counter: an attacker elsewhere can lock the account and flood the address,
// and its owner still gets in from their usual browser (OWASP's device-cookie
// scheme, from memory). From anywhere else, the account and the address.
func (s *Server) signInKeys(r *http.Request, email string) []db.ThrottleKey {
	if dev, ok := s.deviceFor(r, email); ok {
		return []db.ThrottleKey{{Key: "device:" + dev, Rule: credential.Account}}
	}
	return []db.ThrottleKey{
		{Key: accountKey(email), Rule: credential.Account},
		{Key: "address:" + s.clientAddr(r), Rule: credential.Address, Shared: true},
	}
}

func accountKey(email string) string { return "account:" + strings.ToLower(email) }

func (s *Server) signIn(w http.ResponseWriter, r *http.Request) error {
	r.Body = http.MaxBytesReader(w, r.Body, 16<<10)
	if err := r.ParseForm(); err != nil {
		s.render(w, r, http.StatusBadRequest, views.SignIn(views.SignInModel{Assets: s.assets, Next: "/", Error: "The form could not be read.", Demo: s.demoNote}))
		return nil
	}
	email := strings.TrimSpace(r.PostForm.Get("email"))
	pw := r.PostForm.Get("password")
	next := safeNext(r.PostForm.Get("next"))
	page := func(status int, email, msg string) error {
		s.render(w, r, status, views.SignIn(views.SignInModel{Assets: s.assets, Email: email, Next: next, Error: msg, Demo: s.demoNote}))
		return nil
	}
	// Refused before anything is stored: nothing of an overlong address
	// reaches the throttle table or the audit trail.
	if len(email) > maxEmailLen {
		return page(http.StatusUnprocessableEntity, "", fmt.Sprintf("An e-mail address has at most %d characters.", maxEmailLen))
	}
	if len(pw) > maxPasswordLen {
		return page(http.StatusUnprocessableEntity, email, fmt.Sprintf("A password has at most %d bytes.", maxPasswordLen))
	}
	ctx := r.Context()
	keys := s.signInKeys(r, email)
	adm, err := s.store.AdmitAttempt(ctx, keys)
	if err != nil {
		return err
	}
	if !adm.OK {
		w.Header().Set("Retry-After", strconv.Itoa(int(math.Ceil(adm.RetryAfter.Seconds()))))
		return page(http.StatusTooManyRequests, email, fmt.Sprintf(msgSignInThrottled, waitLabel(adm.RetryAfter)))
	}
	if err := s.tryPassword(w, r, email, pw, next, keys, page); err != nil {
		// Not finished (the database refused a write): the attempt leaves
		// nothing behind.
		_ = s.store.UndoAttempt(context.WithoutCancel(ctx), adm)
		return err
	}
	return nil
}

// tryPassword checks an admitted attempt's password and answers it.
func (s *Server) tryPassword(w http.ResponseWriter, r *http.Request, email, pw, next string, keys []db.ThrottleKey, page func(int, string, string) error) error {
	ctx := r.Context()
	addr := s.clientAddr(r)
	rid := requestID(ctx)
	u, err := s.store.UserForSignIn(ctx, email)
	hash := u.PasswordHash
	if errors.Is(err, cohort.ErrNotFound) {
		hash = s.dummyHash()
	} else if err != nil {
		return err
	}
	var ok bool
	var verr error
	if gerr := s.hashes.run(ctx, false, func() { ok, verr = credential.Verify(pw, hash) }); gerr != nil {
		// Not tried: the attempt does not count.
		if err := s.store.RefundAttempt(context.WithoutCancel(ctx), keys); err != nil {
			return err
		}
		if errors.Is(gerr, errHashBusy) {
			w.Header().Set("Retry-After", "2")
			return page(http.StatusServiceUnavailable, email, msgSignInBusy)
		}
		return gerr
	}
	reason := ""
	switch {
	case errors.Is(err, cohort.ErrNotFound):
		reason = "unknown account"
	case verr != nil:
		reason = "stored hash unreadable"
		s.log.Error("password hash unreadable", "user_id", u.ID, "err", verr)
	case !ok:
		reason = "wrong password"
	case !u.Active:
		reason = "account deactivated"
	}
	if reason != "" {
		if err := s.store.RecordSignInFailure(ctx, email, addr, rid, reason); err != nil {
			return err
		}
		if err := s.store.CountFailure(ctx, keys); err != nil {
			return err
		}
		return page(http.StatusUnauthorized, email, msgSignInFailed)
	}
	// The right password: the account's (or device's) failures are
	// forgotten; the address, which others may share, keeps its count.
	var personal []string
	for _, k := range keys {
		if !k.Shared {
			personal = append(personal, k.Key)
		}
	}
	if err := s.store.ClearThrottle(ctx, personal...); err != nil {
		return err
	}
	return s.passwordAccepted(w, r, u, next)
}

// waitLabel says a wait in words: "30 seconds", "4 minutes".
func waitLabel(d time.Duration) string {
	if d <= time.Minute {
		return cohort.Plural(int(math.Ceil(d.Seconds())), "second")
	}
	return cohort.Plural(int(math.Ceil(d.Minutes())), "minute")
}

func (s *Server) signOut(w http.ResponseWriter, r *http.Request) error {
	if u, ok := s.currentUser(r); ok {
		if err := s.store.Audit(r.Context(), u.Actor(s.clientAddr(r), requestID(r.Context())), "signout", "user", "", nil, nil); err != nil {
			return err
		}
	}
	if err := s.sessions.Destroy(r.Context()); err != nil {
		return err
	}
	http.Redirect(w, r, "/signin", http.StatusSeeOther)
	return nil
}

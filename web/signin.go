package web

import (
	"context"
	"errors"
	"net/http"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/views"
)

type signInStore interface {
	UserForSignIn(ctx context.Context, email string) (db.User, error)
	SignInThrottle(ctx context.Context, account, addr string, limit int, window time.Duration) (bool, error)
	RecordSignInFailure(ctx context.Context, account, addr, requestID, reason string) error
	RecordSignIn(ctx context.Context, a cohort.Actor) error
	Audit(ctx context.Context, a cohort.Actor, action, objType, objID string, old, new any) error
}

// Sign-in throttling: after this many failures for one account or one client
// address within the window, further attempts are refused until the window
// passes.
const (
	signInLimit  = 5
	signInWindow = 15 * time.Minute
)

// The one message for every failed sign-in, so nobody learns whether an account
// exists.
const (
	msgSignInFailed    = "Sign-in failed. Check the e-mail address and password."
	msgSignInThrottled = "Too many failed attempts. Sign-in is paused for 15 minutes for this account or this computer."
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

func (s *Server) signIn(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return &cohort.ValidationError{Fields: map[string]string{"form": "the form could not be read"}}
	}
	email := strings.TrimSpace(r.PostForm.Get("email"))
	pw := r.PostForm.Get("password")
	next := safeNext(r.PostForm.Get("next"))
	addr := s.clientAddr(r)
	rid := requestID(r.Context())
	fail := func(status int, msg string) error {
		s.render(w, r, status, views.SignIn(views.SignInModel{Assets: s.assets, Email: email, Next: next, Error: msg, Demo: s.demoNote}))
		return nil
	}
	ctx := r.Context()
	throttled, err := s.store.SignInThrottle(ctx, email, addr, signInLimit, signInWindow)
	if err != nil {
		return err
	}
	if throttled {
		if err := s.store.RecordSignInFailure(ctx, email, addr, rid, "throttled"); err != nil {
			return err
		}
		return fail(http.StatusTooManyRequests, msgSignInThrottled)
	}
	u, err := s.store.UserForSignIn(ctx, email)
	hash := u.PasswordHash
	if errors.Is(err, cohort.ErrNotFound) {
		hash = s.dummyHash()
	} else if err != nil {
		return err
	}
	ok, verr := credential.Verify(pw, hash)
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
		return fail(http.StatusUnauthorized, msgSignInFailed)
	}
	// A new session token at sign-in, so a token planted before sign-in is useless.
	if err := s.sessions.RenewToken(ctx); err != nil {
		return err
	}
	s.sessions.Put(ctx, sessionUserKey, db.SessionMarker(u.ID))
	if err := s.store.RecordSignIn(ctx, u.Actor(addr, rid)); err != nil {
		return err
	}
	http.Redirect(w, r, next, http.StatusSeeOther)
	return nil
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

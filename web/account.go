package web

import (
	"context"
	"errors"
	"net/http"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/views"
)

type accountStore interface {
	ChangeOwnPassword(ctx context.Context, a cohort.Actor, hash string) error
}

// sessionSetupKey names the step a session owes before it may use the
// application: setupPassword (an administrator set the password) or
// setupSecondFactor (the study requires a second factor of the role and none
// is set up). Only routes marked setup (the account pages) and sign-out are
// open until it is done.
const (
	sessionSetupKey   = "setup"
	setupPassword     = "password"
	setupSecondFactor = "second-factor"
)

// toSetup sends a session to the step it owes.
func (s *Server) toSetup(w http.ResponseWriter, r *http.Request, step string) {
	target := "/account/password"
	if step == setupSecondFactor {
		target = "/account/second-factor"
	}
	if r.Header.Get("HX-Request") == "true" {
		w.Header().Set("HX-Redirect", target)
		w.WriteHeader(http.StatusUnauthorized)
		return
	}
	http.Redirect(w, r, target, http.StatusSeeOther)
}

// nextSetup is the step a signed-in user still owes, "" when none.
func (s *Server) nextSetup(ctx context.Context, u db.User) (string, error) {
	if u.MustChangePassword {
		return setupPassword, nil
	}
	need, err := s.secondFactorNeeded(ctx, u)
	if err != nil || !need {
		return "", err
	}
	return setupSecondFactor, nil
}

func (s *Server) accountHome(w http.ResponseWriter, r *http.Request) error {
	u, _ := userFrom(r.Context())
	m := views.AccountModel{Page: s.page(r, "Your account", ""), Email: u.Email, SecondFactor: "off"}
	st, err := s.store.SecondFactor(r.Context(), u.ID)
	if err != nil {
		return err
	}
	if st.Enabled {
		m.SecondFactor, m.Recovery = "on", st.RecoveryLeft
	}
	if m.Required, err = s.secondFactorRequired(r.Context(), u.Role); err != nil {
		return err
	}
	return s.ok(w, r, views.Account(m))
}

func (s *Server) passwordForm(w http.ResponseWriter, r *http.Request) error {
	u, _ := userFrom(r.Context())
	return s.ok(w, r, views.PasswordChange(views.PasswordChangeModel{Page: s.page(r, "Change your password", ""), Required: u.MustChangePassword}))
}

// passwordChange lets the signed-in person choose a new password: the current
// one is asked again (a walked-away session cannot take over the account),
// the new one must meet the policy. Other sessions end; this one goes on with
// a new token.
func (s *Server) passwordChange(w http.ResponseWriter, r *http.Request) error {
	u, _ := userFrom(r.Context())
	ctx := r.Context()
	r.Body = http.MaxBytesReader(w, r.Body, 16<<10)
	if err := r.ParseForm(); err != nil {
		return &cohort.ValidationError{Fields: map[string]string{"form": "the form could not be read"}}
	}
	cur, pw, again := r.PostForm.Get("current"), r.PostForm.Get("new"), r.PostForm.Get("repeat")
	page := func(status int, errs map[string]string) error {
		s.render(w, r, status, views.PasswordChange(views.PasswordChangeModel{Page: s.page(r, "Change your password", ""), Required: u.MustChangePassword, Errors: errs}))
		return nil
	}
	// The current password is a password guess like any other: throttled.
	keys := []db.ThrottleKey{{Key: accountKey(u.Email), Rule: credential.Account}}
	adm, err := s.store.AdmitAttempt(ctx, keys)
	if err != nil {
		return err
	}
	if !adm.OK {
		return page(http.StatusTooManyRequests, map[string]string{"current": "too many wrong passwords; try again in " + waitLabel(adm.RetryAfter)})
	}
	answered, err := s.checkCurrentPassword(w, r, u, cur, keys, page)
	if err != nil {
		// Not finished: the attempt leaves nothing behind.
		_ = s.store.UndoAttempt(context.WithoutCancel(ctx), adm)
		return err
	}
	if answered {
		return nil
	}
	errs := map[string]string{}
	if perr := credential.CheckPolicy(pw, u.Email, u.Name); perr != nil {
		errs["new"] = perr.Error()
	} else if pw == cur {
		errs["new"] = "choose a password other than the current one"
	} else if again != pw {
		errs["repeat"] = "the two new passwords differ"
	}
	if len(errs) > 0 {
		return page(http.StatusUnprocessableEntity, errs)
	}
	hash, err := s.hashPassword(ctx, pw)
	if err != nil {
		return err
	}
	if err := s.store.ChangeOwnPassword(ctx, s.actor(r), hash); err != nil {
		return err
	}
	// Every session of the account was ended; this one starts again.
	if err := s.sessions.RenewToken(ctx); err != nil {
		return err
	}
	u.MustChangePassword = false
	step, err := s.nextSetup(ctx, u)
	if err != nil {
		return err
	}
	s.setSetup(ctx, step)
	p := s.page(r, "Your account", "")
	p.Flash = "Your password is changed. Other sessions of your account have ended."
	if step != "" {
		s.toSetup(w, r, step)
		return nil
	}
	st, err := s.store.SecondFactor(ctx, u.ID)
	if err != nil {
		return err
	}
	m := views.AccountModel{Page: p, Email: u.Email, SecondFactor: "off"}
	if st.Enabled {
		m.SecondFactor, m.Recovery = "on", st.RecoveryLeft
	}
	return s.ok(w, r, views.Account(m))
}

// setSetup records the step the session owes ("" clears it).
func (s *Server) setSetup(ctx context.Context, step string) {
	if step == "" {
		s.sessions.Remove(ctx, sessionSetupKey)
		return
	}
	s.sessions.Put(ctx, sessionSetupKey, step)
}

// checkCurrentPassword verifies the current password of an admitted attempt.
// A wrong one is audited like a failed sign-in and answered here (answered
// true).
func (s *Server) checkCurrentPassword(w http.ResponseWriter, r *http.Request, u db.User, cur string, keys []db.ThrottleKey, page func(int, map[string]string) error) (answered bool, err error) {
	ctx := r.Context()
	full, err := s.store.UserForSignIn(ctx, u.Email)
	if err != nil {
		return false, err
	}
	var ok bool
	if err := s.hashes.run(ctx, false, func() { ok, _ = credential.Verify(cur, full.PasswordHash) }); err != nil {
		if !errors.Is(err, errHashBusy) {
			return false, err
		}
		if err := s.store.RefundAttempt(ctx, keys); err != nil {
			return false, err
		}
		w.Header().Set("Retry-After", "2")
		return true, page(http.StatusServiceUnavailable, map[string]string{"form": msgSignInBusy})
	}
	if !ok {
		if err := s.store.RecordSignInFailure(ctx, u.Email, s.clientAddr(r), requestID(ctx), "wrong current password at a password change"); err != nil {
			return false, err
		}
		return true, page(http.StatusUnprocessableEntity, map[string]string{"current": "this is not your current password"})
	}
	return false, s.store.ClearThrottle(ctx, keys[0].Key)
}

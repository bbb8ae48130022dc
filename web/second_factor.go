package web

import (
	"context"
	"encoding/base64"
	"errors"
	"fmt"
	"net/http"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/views"
)

type secondFactorStore interface {
	SecondFactor(ctx context.Context, userID int64) (db.SecondFactorState, error)
	EnableSecondFactor(ctx context.Context, a cohort.Actor, sealed string, step int64, codes []db.RecoveryCodeHash) error
	UseTOTPStep(ctx context.Context, userID, step int64) (bool, error)
	RecoveryCode(ctx context.Context, userID int64, id string) (string, error)
	UseRecoveryCode(ctx context.Context, a cohort.Actor, id string) (bool, error)
	ResetSecondFactor(ctx context.Context, a cohort.Actor, userID int64) error
	SecondFactorRequired(ctx context.Context) (bool, error)
	SetSecondFactorRequired(ctx context.Context, a cohort.Actor, required bool) error
	SecondFactorUsers(ctx context.Context) (map[int64]bool, error)
}

// Session keys of the sign-in between the password and the code, and of an
// second factor being set up.
const (
	sessionPendingUser = "pending_uid"          // password right, code still owed
	sessionPendingNext = "pending_next"         // where to go after the code
	sessionPendingAt   = "pending_at"           // when the password was accepted (Unix seconds)
	sessionSetUpSecret = "second_factor_secret" // the sealed secret being set up
	pendingTimeout     = 5 * time.Minute
)

const totpIssuer = "cohortdesk"

func init() {
	views.RegisterAdminLink("/admin/security", "Sign-in security: the second-factor rule, who has one, resets for lost phones")
}

// secondFactorRequired: the study's rule, for roles that see identifying
// details (cohort.Role.SeesPHI, the one rule of who does).
func (s *Server) secondFactorRequired(ctx context.Context, role cohort.Role) (bool, error) {
	if !role.SeesPHI() {
		return false, nil
	}
	return s.store.SecondFactorRequired(ctx)
}

// secondFactorNeeded: required of u and not set up.
func (s *Server) secondFactorNeeded(ctx context.Context, u db.User) (bool, error) {
	req, err := s.secondFactorRequired(ctx, u.Role)
	if err != nil || !req {
		return false, err
	}
	st, err := s.store.SecondFactor(ctx, u.ID)
	return !st.Enabled, err
}

func (s *Server) sealKey() []byte {
	if len(s.secret) == 0 {
		return nil
	}
	return credential.SealKey(s.secret)
}

func sealContext(userID int64) string { return "user:" + strconv.FormatInt(userID, 10) }

// passwordAccepted goes on from a right password: to the code when the
// account has a second factor, else straight in.
func (s *Server) passwordAccepted(w http.ResponseWriter, r *http.Request, u db.User, next string) error {
	ctx := r.Context()
	st, err := s.store.SecondFactor(ctx, u.ID)
	if err != nil {
		return err
	}
	if !st.Enabled {
		return s.completeSignIn(w, r, u, next)
	}
	if err := s.sessions.RenewToken(ctx); err != nil {
		return err
	}
	s.sessions.Put(ctx, sessionPendingUser, strconv.FormatInt(u.ID, 10))
	s.sessions.Put(ctx, sessionPendingNext, next)
	s.sessions.Put(ctx, sessionPendingAt, strconv.FormatInt(s.now().Unix(), 10))
	http.Redirect(w, r, "/signin/code", http.StatusSeeOther)
	return nil
}

// completeSignIn starts the signed-in session of u and sends it on: to the
// step it owes (a password to change, a second factor to set up) or to next.
func (s *Server) completeSignIn(w http.ResponseWriter, r *http.Request, u db.User, next string) error {
	ctx := r.Context()
	// A new session token at sign-in, so a token planted before sign-in is useless.
	if err := s.sessions.RenewToken(ctx); err != nil {
		return err
	}
	for _, k := range []string{sessionPendingUser, sessionPendingNext, sessionPendingAt} {
		s.sessions.Remove(ctx, k)
	}
	s.sessions.Put(ctx, sessionUserKey, db.SessionMarker(u.ID))
	step, err := s.nextSetup(ctx, u)
	if err != nil {
		return err
	}
	s.setSetup(ctx, step)
	if err := s.store.RecordSignIn(ctx, u.Actor(s.clientAddr(r), requestID(ctx))); err != nil {
		return err
	}
	s.trustDevice(w, r, u)
	if step != "" {
		s.toSetup(w, r, step)
		return nil
	}
	http.Redirect(w, r, next, http.StatusSeeOther)
	return nil
}

// pendingUser is the account whose password this session gave, while its
// code is owed and not too long ago.
func (s *Server) pendingUser(r *http.Request) (db.User, bool) {
	ctx := r.Context()
	id, err := strconv.ParseInt(s.sessions.GetString(ctx, sessionPendingUser), 10, 64)
	if err != nil {
		return db.User{}, false
	}
	at, err := strconv.ParseInt(s.sessions.GetString(ctx, sessionPendingAt), 10, 64)
	if err != nil || s.now().Sub(time.Unix(at, 0)) > pendingTimeout {
		return db.User{}, false
	}
	u, err := s.store.UserByID(ctx, id)
	if err != nil || !u.Active {
		return db.User{}, false
	}
	return u, true
}

// noPending answers a code step with no password step before it (or one that
// expired): the sign-in form again.
func (s *Server) noPending(w http.ResponseWriter, r *http.Request, status int) error {
	s.render(w, r, status, views.SignIn(views.SignInModel{Assets: s.assets, Next: "/", Demo: s.demoNote,
		Error: "Sign in with your e-mail address and password first (a sign-in waits at most 5 minutes for its code)."}))
	return nil
}

func (s *Server) signInCodeForm(w http.ResponseWriter, r *http.Request) error {
	if _, ok := s.pendingUser(r); !ok {
		return s.noPending(w, r, http.StatusOK)
	}
	return s.ok(w, r, views.SignInCode(views.SignInCodeModel{Assets: s.assets}))
}

const msgCodeFailed = "That code did not work. Enter the code the app shows now, or an unused recovery code."

// signInCode checks the second factor: a TOTP code (each time step once) or
// an unused recovery code. Guesses are throttled per account.
func (s *Server) signInCode(w http.ResponseWriter, r *http.Request) (err error) {
	u, ok := s.pendingUser(r)
	if !ok {
		return s.noPending(w, r, http.StatusUnauthorized)
	}
	ctx := r.Context()
	r.Body = http.MaxBytesReader(w, r.Body, 4<<10)
	if err := r.ParseForm(); err != nil {
		return &cohort.ValidationError{Fields: map[string]string{"code": "the form could not be read"}}
	}
	code := r.PostForm.Get("code")
	page := func(status int, msg string) error {
		s.render(w, r, status, views.SignInCode(views.SignInCodeModel{Assets: s.assets, Error: msg}))
		return nil
	}
	keys := []db.ThrottleKey{{Key: "code:" + strconv.FormatInt(u.ID, 10), Rule: credential.Code}}
	adm, err := s.store.AdmitAttempt(ctx, keys)
	if err != nil {
		return err
	}
	defer func() {
		if err != nil { // not finished: the attempt leaves nothing behind
			_ = s.store.UndoAttempt(context.WithoutCancel(ctx), adm)
		}
	}()
	if !adm.OK {
		w.Header().Set("Retry-After", strconv.Itoa(int(adm.RetryAfter.Seconds())+1))
		return page(http.StatusTooManyRequests, "Too many wrong codes. Try again in "+waitLabel(adm.RetryAfter)+".")
	}
	good, how, err := s.checkCode(ctx, u, code)
	if errors.Is(err, errHashBusy) {
		_ = s.store.RefundAttempt(context.WithoutCancel(ctx), keys)
		w.Header().Set("Retry-After", "2")
		return page(http.StatusServiceUnavailable, msgSignInBusy)
	}
	if err != nil {
		return err
	}
	if !good {
		if err := s.store.RecordSignInFailure(ctx, u.Email, s.clientAddr(r), requestID(ctx), "wrong second-factor code"); err != nil {
			return err
		}
		return page(http.StatusUnauthorized, msgCodeFailed)
	}
	if err := s.store.ClearThrottle(ctx, keys[0].Key); err != nil {
		return err
	}
	next := safeNext(s.sessions.GetString(ctx, sessionPendingNext))
	if how == "recovery" {
		// A recovery code is a sign that the phone is gone: straight to
		// setting up a new second factor.
		next = "/account/second-factor"
	}
	return s.completeSignIn(w, r, u, next)
}

// checkCode tells whether code is u's current TOTP code (not used before) or
// an unused recovery code, which it then uses up.
func (s *Server) checkCode(ctx context.Context, u db.User, code string) (ok bool, how string, err error) {
	st, err := s.store.SecondFactor(ctx, u.ID)
	if err != nil || !st.Enabled {
		return false, "", err
	}
	if id, secret, isRecovery := credential.SplitRecoveryCode(code); isRecovery {
		hash, err := s.store.RecoveryCode(ctx, u.ID, id)
		if errors.Is(err, cohort.ErrNotFound) {
			return false, "", nil
		} else if err != nil {
			return false, "", err
		}
		var match bool
		if err := s.hashes.run(ctx, false, func() { match, _ = credential.Verify(secret, hash) }); err != nil {
			return false, "", err
		}
		if !match {
			return false, "", nil
		}
		used, err := s.store.UseRecoveryCode(ctx, u.Actor("", ""), id)
		return used, "recovery", err
	}
	key := s.sealKey()
	if key == nil {
		return false, "", errors.New("web: second factor set up but no deployment secret to open it")
	}
	secret, err := credential.Open(key, st.Sealed, sealContext(u.ID))
	if err != nil {
		return false, "", err
	}
	step, match := credential.TOTPMatch(secret, code, s.now())
	if !match {
		return false, "", nil
	}
	fresh, err := s.store.UseTOTPStep(ctx, u.ID, step)
	return fresh, "totp", err
}

// secondFactorForm shows a new secret to set up, kept (sealed) in the session until
// a code confirms it.
func (s *Server) secondFactorForm(w http.ResponseWriter, r *http.Request) error {
	return s.secondFactorPage(w, r, http.StatusOK, "")
}

func (s *Server) secondFactorPage(w http.ResponseWriter, r *http.Request, status int, msg string) error {
	ctx := r.Context()
	u, _ := userFrom(ctx)
	m := views.EnrolModel{Page: s.page(r, "Second factor", ""), Account: u.Email, Error: msg}
	var err error
	if m.Required, err = s.secondFactorRequired(ctx, u.Role); err != nil {
		return err
	}
	st, err := s.store.SecondFactor(ctx, u.ID)
	if err != nil {
		return err
	}
	m.Enabled = st.Enabled
	key := s.sealKey()
	if key == nil {
		m.Missing = "This server has no deployment secret, so it cannot keep a second factor safely. Ask the technical contact to set COHORTDESK_SECRET."
		s.render(w, r, status, views.Enrol(m))
		return nil
	}
	secret := ""
	if sealed := s.sessions.GetString(ctx, sessionSetUpSecret); sealed != "" {
		secret, _ = credential.Open(key, sealed, sealContext(u.ID))
	}
	if secret == "" {
		secret = credential.NewTOTPSecret()
		sealed, err := credential.Seal(key, secret, sealContext(u.ID))
		if err != nil {
			return err
		}
		s.sessions.Put(ctx, sessionSetUpSecret, sealed)
	}
	uri, err := credential.TOTPURI(secret, totpIssuer, u.Email)
	if err != nil {
		return err
	}
	png, err := credential.TOTPQR(uri, 220)
	if err != nil {
		return err
	}
	m.QR = "data:image/png;base64," + base64.StdEncoding.EncodeToString(png)
	m.Secret = credential.GroupSecret(secret)
	s.render(w, r, status, views.Enrol(m))
	return nil
}

// secondFactorSetUp confirms the secret being set up with a code from the app, stores it
// with new recovery codes, and shows the codes once.
func (s *Server) secondFactorSetUp(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	u, _ := userFrom(ctx)
	key := s.sealKey()
	sealed := s.sessions.GetString(ctx, sessionSetUpSecret)
	if key == nil || sealed == "" {
		return s.secondFactorPage(w, r, http.StatusUnprocessableEntity, "The set-up expired. Scan the new code below and try again.")
	}
	secret, err := credential.Open(key, sealed, sealContext(u.ID))
	if err != nil {
		s.sessions.Remove(ctx, sessionSetUpSecret)
		return s.secondFactorPage(w, r, http.StatusUnprocessableEntity, "The set-up expired. Scan the new code below and try again.")
	}
	if err := r.ParseForm(); err != nil {
		return &cohort.ValidationError{Fields: map[string]string{"code": "the form could not be read"}}
	}
	step, ok := credential.TOTPMatch(secret, r.PostForm.Get("code"), s.now())
	if !ok {
		return s.secondFactorPage(w, r, http.StatusUnprocessableEntity, "That code does not match. Check the phone's clock and enter the code the app shows now.")
	}
	codes := make([]string, credential.RecoveryCodes)
	hashes := make([]db.RecoveryCodeHash, credential.RecoveryCodes)
	for i := range codes {
		code, id, part := credential.NewRecoveryCode()
		h, err := s.hashPassword(ctx, part)
		if err != nil {
			return err
		}
		codes[i], hashes[i] = code, db.RecoveryCodeHash{ID: id, Hash: h}
	}
	if err := s.store.EnableSecondFactor(ctx, s.actor(r), sealed, step, hashes); err != nil {
		return err
	}
	s.sessions.Remove(ctx, sessionSetUpSecret)
	if s.sessions.GetString(ctx, sessionSetupKey) == setupSecondFactor {
		s.setSetup(ctx, "")
	}
	return s.ok(w, r, views.RecoveryCodes(views.RecoveryCodesModel{Page: s.page(r, "Second factor on", ""), Codes: codes}))
}

// securityPage is the administrator's view of the second-factor rule and of
// who has one.
func (s *Server) securityPage(w http.ResponseWriter, r *http.Request) error {
	return s.securityRender(w, r, "")
}

func (s *Server) securityRender(w http.ResponseWriter, r *http.Request, flash string) error {
	ctx := r.Context()
	req, err := s.store.SecondFactorRequired(ctx)
	if err != nil {
		return err
	}
	on, err := s.store.SecondFactorUsers(ctx)
	if err != nil {
		return err
	}
	us, err := s.store.Users(ctx)
	if err != nil {
		return err
	}
	p := s.page(r, "Sign-in security", "admin")
	p.Flash = flash
	m := views.SecurityModel{Page: p, Required: req}
	for _, u := range us {
		if !u.Active {
			continue
		}
		m.Rows = append(m.Rows, views.SecurityRow{ID: u.ID, Name: u.Name, Email: u.Email, Role: u.Role.Label(), SeesPHI: u.Role.SeesPHI(), Enabled: on[u.ID]})
	}
	return s.ok(w, r, views.Security(m))
}

func (s *Server) securitySave(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return &cohort.ValidationError{Fields: map[string]string{"required": "the form could not be read"}}
	}
	req := r.PostForm.Get("required") == "on"
	if err := s.store.SetSecondFactorRequired(r.Context(), s.actor(r), req); err != nil {
		return err
	}
	msg := "A second factor is no longer required."
	if req {
		msg = "A second factor is now required of roles that see identifying details, from their next sign-in."
	}
	return s.securityRender(w, r, msg)
}

func (s *Server) secondFactorReset(w http.ResponseWriter, r *http.Request) error {
	u, err := s.userByParam(r)
	if err != nil {
		return err
	}
	if err := s.store.ResetSecondFactor(r.Context(), s.actor(r), u.ID); err != nil {
		return err
	}
	return s.securityRender(w, r, fmt.Sprintf("%s's second factor was removed; they are signed out.", u.Name))
}

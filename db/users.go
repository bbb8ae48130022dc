package db

import (
	"context"
	"fmt"
	"strings"
	"time"

	"cohortdesk/cohort"

	"github.com/jackc/pgx/v5"
)

// User is a staff account.
type User struct {
	ID           int64
	Email        string
	Name         string
	Role         cohort.Role
	Active       bool
	LastSignIn   *time.Time
	Version      int
	PasswordHash string // only filled by UserForSignIn
	// MustChangePassword: an administrator set the password; its owner must
	// choose their own before doing anything else.
	MustChangePassword bool
}

// Actor is the user as the author of changes.
func (u User) Actor(addr, requestID string) cohort.Actor {
	return cohort.Actor{UserID: u.ID, Name: u.Name, Role: u.Role, Addr: addr, RequestID: requestID}
}

// NewUser is the input for creating an account.
type NewUser struct {
	Email        string
	Name         string
	Role         cohort.Role
	PasswordHash string
	// MustChangePassword: the password is one an administrator chose.
	MustChangePassword bool
}

const userCols = `id, email, display_name, role, active, last_sign_in_at, version, must_change_password`

func scanUser(row pgx.CollectableRow) (User, error) {
	var u User
	var role string
	err := row.Scan(&u.ID, &u.Email, &u.Name, &role, &u.Active, &u.LastSignIn, &u.Version, &u.MustChangePassword)
	u.Role = cohort.Role(role)
	return u, err
}

// CreateUser adds an account and audits it. A taken e-mail is ErrConflict.
func (s *Store) CreateUser(ctx context.Context, a cohort.Actor, n NewUser) (User, error) {
	if err := cohort.CheckAccount(n.Email, n.Name, n.Role); err != nil {
		return User{}, err
	}
	var u User
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `
			INSERT INTO users (email, display_name, role, password_hash, must_change_password) VALUES ($1, $2, $3, $4, $5)
			RETURNING `+userCols, strings.TrimSpace(n.Email), strings.TrimSpace(n.Name), string(n.Role), n.PasswordHash, n.MustChangePassword)
		if err != nil {
			return err
		}
		u, err = pgx.CollectExactlyOneRow(rows, scanUser)
		if err != nil {
			return err
		}
		return audit(ctx, tx, a, "user.create", "user", fmt.Sprint(u.ID), nil,
			map[string]any{"email": u.Email, "name": u.Name, "role": u.Role})
	})
	if err != nil {
		return User{}, mapErr("create user", err)
	}
	return u, nil
}

// UserByID returns an account.
func (s *Store) UserByID(ctx context.Context, id int64) (User, error) {
	rows, err := s.pool.Query(ctx, `SELECT `+userCols+` FROM users WHERE id = $1`, id)
	if err != nil {
		return User{}, mapErr("user", err)
	}
	u, err := pgx.CollectExactlyOneRow(rows, scanUser)
	return u, mapErr("user", err)
}

// UserAndStudy returns an account by id and the study's name ("" before the
// study is set up) in one read: what every page's access check and layout
// need. It reads the primary, so an account deactivated a moment ago is
// refused at once whatever the standby's lag.
func (s *Store) UserAndStudy(ctx context.Context, id int64) (User, string, error) {
	var u User
	var role, study string
	err := s.pool.QueryRow(ctx, `SELECT `+userCols+`, coalesce((SELECT name FROM study WHERE id = 1), '') FROM users WHERE id = $1`, id).
		Scan(&u.ID, &u.Email, &u.Name, &role, &u.Active, &u.LastSignIn, &u.Version, &u.MustChangePassword, &study)
	u.Role = cohort.Role(role)
	return u, study, mapErr("user", err)
}

// UserForSignIn returns an account with its password hash, by e-mail.
func (s *Store) UserForSignIn(ctx context.Context, email string) (User, error) {
	var u User
	var role string
	err := s.pool.QueryRow(ctx, `SELECT `+userCols+`, password_hash FROM users WHERE email = $1`, strings.TrimSpace(email)).
		Scan(&u.ID, &u.Email, &u.Name, &role, &u.Active, &u.LastSignIn, &u.Version, &u.MustChangePassword, &u.PasswordHash)
	u.Role = cohort.Role(role)
	return u, mapErr("user for sign-in", err)
}

// Users lists all accounts, active first.
func (s *Store) Users(ctx context.Context) ([]User, error) {
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+userCols+` FROM users ORDER BY active DESC, display_name, id`)
	if err != nil {
		return nil, mapErr("users", err)
	}
	us, err := pgx.CollectRows(rows, scanUser)
	return us, mapErr("users", err)
}

// UserChange is an edit of an account by an administrator.
type UserChange struct {
	Name    string
	Role    cohort.Role
	Active  bool
	Version int // the version the editor saw
}

// UpdateUser changes an account if nobody changed it since Version, and audits
// old and new values; cohort.CheckAccountChange says what an edit may do.
func (s *Store) UpdateUser(ctx context.Context, a cohort.Actor, id int64, c UserChange) (User, error) {
	if err := cohort.CheckAccountChange(c.Name, c.Role, c.Active, id == a.UserID); err != nil {
		return User{}, err
	}
	var out User
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `SELECT `+userCols+` FROM users WHERE id = $1 FOR UPDATE`, id)
		if err != nil {
			return err
		}
		old, err := pgx.CollectExactlyOneRow(rows, scanUser)
		if err != nil {
			return err
		}
		if old.Version != c.Version {
			return &cohort.ConflictError{Message: fmt.Sprintf("%s's account was changed by someone else after you opened it; reload to see the current values", old.Name)}
		}
		rows, err = tx.Query(ctx, `
			UPDATE users SET display_name = $2, role = $3, active = $4, version = version + 1, updated_at = now()
			WHERE id = $1 RETURNING `+userCols, id, strings.TrimSpace(c.Name), string(c.Role), c.Active)
		if err != nil {
			return err
		}
		out, err = pgx.CollectExactlyOneRow(rows, scanUser)
		if err != nil {
			return err
		}
		if !c.Active {
			// End the person's sessions at once.
			if err := endSessions(ctx, tx, id); err != nil {
				return err
			}
		}
		return audit(ctx, tx, a, "user.update", "user", fmt.Sprint(id),
			map[string]any{"name": old.Name, "role": old.Role, "active": old.Active},
			map[string]any{"name": out.Name, "role": out.Role, "active": out.Active})
	})
	if err != nil {
		return User{}, mapErr("update user", err)
	}
	return out, nil
}

// sessionMarker is a string the session data holds for a user, so the user's
// sessions can be found. The web layer stores it under the "uid" key.
func sessionMarker(id int64) string { return fmt.Sprintf("cdu:%d:", id) }

// SessionMarker exposes the marker for the web layer.
func SessionMarker(id int64) string { return sessionMarker(id) }

// SetPassword replaces an account's password hash with one an administrator
// chose, ends the account's sessions everywhere (whoever knew the old password
// is signed out), makes its owner choose their own at the next sign-in, and
// audits the event (never the hash itself).
func (s *Store) SetPassword(ctx context.Context, a cohort.Actor, id int64, hash string) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		tag, err := tx.Exec(ctx, `UPDATE users SET password_hash = $2, must_change_password = true, version = version + 1, updated_at = now() WHERE id = $1`, id, hash)
		if err != nil {
			return err
		}
		if tag.RowsAffected() == 0 {
			return pgx.ErrNoRows
		}
		if err := endSessions(ctx, tx, id); err != nil {
			return err
		}
		return audit(ctx, tx, a, "user.password_set", "user", fmt.Sprint(id), nil, nil)
	})
	return mapErr("set password", err)
}

// RecordSignInFailure audits a failed attempt that was tried (throttled
// ones are only counted, in sign_in_throttle) with the submitted account name
// (which may not exist; the forms bound it to 254 characters).
func (s *Store) RecordSignInFailure(ctx context.Context, account, addr, requestID, reason string) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		// Keys that no longer matter for throttling.
		if _, err := tx.Exec(ctx, `DELETE FROM sign_in_throttle WHERE updated_at < $1 AND (locked_until IS NULL OR locked_until < $2)`,
			s.now().Add(-24*time.Hour), s.now()); err != nil {
			return err
		}
		return audit(ctx, tx, cohort.Actor{Name: "anonymous", Addr: addr, RequestID: requestID},
			"signin.failed", "account", strings.TrimSpace(account), nil, map[string]string{"reason": reason})
	})
	return mapErr("record sign-in failure", err)
}

// RecordSignIn marks a successful sign-in and audits it.
func (s *Store) RecordSignIn(ctx context.Context, a cohort.Actor) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `UPDATE users SET last_sign_in_at = $2 WHERE id = $1`, a.UserID, s.now()); err != nil {
			return err
		}
		return audit(ctx, tx, a, "signin", "user", fmt.Sprint(a.UserID), nil, nil)
	})
	return mapErr("record sign-in", err)
}

// CountUsers is how many accounts exist, to tell a fresh install.
func (s *Store) CountUsers(ctx context.Context) (int, error) {
	var n int
	err := s.pool.QueryRow(ctx, `SELECT count(*) FROM users`).Scan(&n)
	return n, mapErr("count users", err)
}

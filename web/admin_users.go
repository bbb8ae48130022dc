package web

import (
	"context"
	"fmt"
	"net/http"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/views"
)

type adminStore interface {
	Users(ctx context.Context) ([]db.User, error)
	CreateUser(ctx context.Context, a cohort.Actor, n db.NewUser) (db.User, error)
	UpdateUser(ctx context.Context, a cohort.Actor, id int64, c db.UserChange) (db.User, error)
	SetPassword(ctx context.Context, a cohort.Actor, id int64, hash string) error
	AuditEvents(ctx context.Context, f db.AuditFilter) ([]db.AuditEvent, error)
	EachAuditEvent(ctx context.Context, f db.AuditFilter, fn func(db.AuditEvent) error) error
}

func (s *Server) adminHome(w http.ResponseWriter, r *http.Request) error {
	return s.ok(w, r, views.AdminHome(views.AdminHomeModel{Page: s.page(r, "Administration", "admin")}))
}

func roleOptions() []views.Option {
	out := make([]views.Option, len(cohort.Roles))
	for i, r := range cohort.Roles {
		out[i] = views.Option{Value: string(r), Label: r.Label()}
	}
	return out
}

func userRows(us []db.User, loc *time.Location) []views.UserRow {
	rows := make([]views.UserRow, len(us))
	for i, u := range us {
		last := "never"
		if u.LastSignIn != nil {
			last = when(*u.LastSignIn, loc)
		}
		rows[i] = views.UserRow{ID: u.ID, Email: u.Email, Name: u.Name, Role: u.Role.Label(), Active: u.Active, LastSignIn: last}
	}
	return rows
}

func (s *Server) usersPage(w http.ResponseWriter, r *http.Request, status int, form views.UserForm, flash string) error {
	us, err := s.store.Users(r.Context())
	if err != nil {
		return err
	}
	p := s.page(r, "Staff accounts", "admin")
	p.Flash = flash
	s.render(w, r, status, views.Users(views.UsersModel{Page: p, Users: userRows(us, s.studyZone(r.Context())), Form: form, Roles: roleOptions()}))
	return nil
}

func (s *Server) usersList(w http.ResponseWriter, r *http.Request) error {
	return s.usersPage(w, r, http.StatusOK, views.UserForm{Role: string(cohort.Coordinator)}, "")
}

// userCreate adds an account with a generated first password, shown once.
func (s *Server) userCreate(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	rd := readForm(r.PostForm)
	f := views.UserForm{Email: rd.raw("email"), Name: rd.raw("name"), Role: rd.text("role")}
	pw := credential.RandomPassword(16)
	hash, err := s.hashPassword(r.Context(), pw)
	if err != nil {
		return err
	}
	u, err := s.store.CreateUser(r.Context(), s.actor(r), db.NewUser{Email: f.Email, Name: f.Name, Role: cohort.Role(f.Role), PasswordHash: hash, MustChangePassword: true})
	if err != nil {
		no, ok := refused(r, err, map[string]string{"email": "an account with this e-mail address already exists"})
		if !ok {
			return err
		}
		f.Errors = no.Fields
		return s.usersPage(w, r, no.Status, f, "")
	}
	return s.usersPage(w, r, http.StatusOK, views.UserForm{Role: string(cohort.Coordinator)},
		fmt.Sprintf("Account created for %s. First password (shown once, give it to them privately): %s", u.Email, pw))
}

func (s *Server) userByParam(r *http.Request) (db.User, error) {
	id, err := idParam(r)
	if err != nil {
		return db.User{}, err
	}
	return s.store.UserByID(r.Context(), id)
}

func (s *Server) userEdit(w http.ResponseWriter, r *http.Request) error {
	u, err := s.userByParam(r)
	if err != nil {
		return err
	}
	return s.ok(w, r, views.UserEdit(views.UserEditModel{Page: s.page(r, "Edit "+u.Name, "admin"), User: userRows([]db.User{u}, s.studyZone(r.Context()))[0],
		Form: views.UserForm{Name: u.Name, Role: string(u.Role), Active: u.Active, Version: u.Version}, Roles: roleOptions()}))
}

func (s *Server) userUpdate(w http.ResponseWriter, r *http.Request) error {
	u, err := s.userByParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	rd := readForm(r.PostForm)
	f := views.UserForm{Name: rd.raw("name"), Role: rd.text("role"), Active: rd.ticked("active"), Version: rd.version()}
	_, err = s.store.UpdateUser(r.Context(), s.actor(r), u.ID, db.UserChange{Name: f.Name, Role: cohort.Role(f.Role), Active: f.Active, Version: f.Version})
	if err == nil {
		http.Redirect(w, r, "/admin/users", http.StatusSeeOther)
		return nil
	}
	no, ok := refused(r, err, nil)
	if !ok {
		return err
	}
	f.Errors = no.Fields
	s.render(w, r, no.Status, views.UserEdit(views.UserEditModel{Page: s.page(r, "Edit "+u.Name, "admin"), User: userRows([]db.User{u}, s.studyZone(r.Context()))[0], Form: f, Roles: roleOptions()}))
	return nil
}

// userResetPassword sets a new random password and shows it once.
func (s *Server) userResetPassword(w http.ResponseWriter, r *http.Request) error {
	u, err := s.userByParam(r)
	if err != nil {
		return err
	}
	pw := credential.RandomPassword(16)
	hash, err := s.hashPassword(r.Context(), pw)
	if err != nil {
		return err
	}
	if err := s.store.SetPassword(r.Context(), s.actor(r), u.ID, hash); err != nil {
		return err
	}
	return s.usersPage(w, r, http.StatusOK, views.UserForm{Role: string(cohort.Coordinator)},
		fmt.Sprintf("New password for %s (shown once, give it to them privately): %s", u.Email, pw))
}

package web

import (
	"context"
	"fmt"
	"net"
	"net/http"
	"net/netip"
	"net/url"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"

	"github.com/alexedwards/scs/v2"
	"github.com/jackc/pgx/v5/pgxpool"
)

// SessionConfig sets the session cookie and its timeouts.
type SessionConfig struct {
	Idle     time.Duration // signed out after this long without a request (default 30 min)
	Lifetime time.Duration // signed out this long after sign-in, however active (default 12 h)
	Secure   bool          // cookie only over HTTPS
}

func newSessions(pool *pgxpool.Pool, c SessionConfig) *scs.SessionManager {
	sm := scs.New()
	sm.IdleTimeout = c.Idle
	if sm.IdleTimeout <= 0 {
		sm.IdleTimeout = 30 * time.Minute
	}
	if pool != nil {
		st := newSessionStore(pool, sm.IdleTimeout)
		go st.cleanup(context.Background(), 10*time.Minute)
		sm.Store = st
	}
	sm.Lifetime = c.Lifetime
	if sm.Lifetime <= 0 {
		sm.Lifetime = 12 * time.Hour
	}
	sm.Cookie.Name = "cohortdesk_session"
	sm.Cookie.HttpOnly = true
	sm.Cookie.SameSite = http.SameSiteLaxMode
	sm.Cookie.Secure = c.Secure
	sm.Cookie.Path = "/"
	sm.Cookie.Persist = false // a browser session cookie; the server enforces the timeouts
	return sm
}

const sessionUserKey = "uid"

type userStore interface {
	UserByID(ctx context.Context, id int64) (db.User, error)
	UserAndStudy(ctx context.Context, id int64) (db.User, string, error)
}

// currentUser loads the signed-in, still active user of the request.
func (s *Server) currentUser(r *http.Request) (db.User, bool) {
	u, _, ok := s.signedIn(r)
	return u, ok
}

// signedIn loads the signed-in, still active user of the request and the
// study's name, in one read.
func (s *Server) signedIn(r *http.Request) (db.User, string, bool) {
	marker := s.sessions.GetString(r.Context(), sessionUserKey)
	if marker == "" {
		return db.User{}, "", false
	}
	id, err := strconv.ParseInt(strings.TrimSuffix(strings.TrimPrefix(marker, "cdu:"), ":"), 10, 64)
	if err != nil {
		return db.User{}, "", false
	}
	u, study, err := s.store.UserAndStudy(r.Context(), id)
	if err != nil || !u.Active {
		return db.User{}, "", false
	}
	return u, study, true
}

// userFrom returns the user the guard put in the context.
func userFrom(ctx context.Context) (db.User, bool) {
	u, ok := ctx.Value(keyUser).(db.User)
	return u, ok
}

// actor is the signed-in user as the author of a change.
func (s *Server) actor(r *http.Request) cohort.Actor {
	u, ok := userFrom(r.Context())
	if !ok {
		return cohort.Actor{Name: "anonymous", Addr: s.clientAddr(r), RequestID: requestID(r.Context())}
	}
	return u.Actor(s.clientAddr(r), requestID(r.Context()))
}

// role is the signed-in user's role, or "" for visitors.
func role(r *http.Request) cohort.Role {
	u, _ := userFrom(r.Context())
	return u.Role
}

// guard enforces the route table: visitors are sent to sign in, users whose role
// is not listed get 403.
func (s *Server) guard(a access, h http.Handler) http.Handler {
	if a.public {
		return h
	}
	if a.scrape {
		return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
			if !s.mayScrape(r) {
				s.serveError(w, r, cohort.ErrForbidden)
				return
			}
			h.ServeHTTP(w, r)
		})
	}
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		u, study, ok := s.signedIn(r)
		if !ok {
			s.toSignIn(w, r)
			return
		}
		if step := s.sessions.GetString(r.Context(), sessionSetupKey); step != "" && !a.setup {
			s.toSetup(w, r, step)
			return
		}
		ctx := context.WithValue(context.WithValue(r.Context(), keyUser, u), keyStudy, study)
		if !a.allows(u.Role) {
			s.serveError(w, r.WithContext(ctx), cohort.ErrForbidden)
			return
		}
		w.Header().Set("Cache-Control", "no-store")
		h.ServeHTTP(w, r.WithContext(ctx))
	})
}

// toSignIn redirects a visitor to the sign-in page, remembering where they were
// going when it was a page view.
func (s *Server) toSignIn(w http.ResponseWriter, r *http.Request) {
	target := "/signin"
	if r.Method == http.MethodGet && r.URL.Path != "/" {
		target += "?next=" + url.QueryEscape(r.URL.RequestURI())
	}
	if r.Header.Get("HX-Request") == "true" {
		w.Header().Set("HX-Redirect", target)
		w.WriteHeader(http.StatusUnauthorized)
		return
	}
	http.Redirect(w, r, target, http.StatusSeeOther)
}

// clientAddr is the address of the client: the connection's peer, or, when that
// peer is a trusted proxy, the last address it appended to X-Forwarded-For.
func (s *Server) clientAddr(r *http.Request) string {
	host, _, err := net.SplitHostPort(r.RemoteAddr)
	if err != nil {
		host = r.RemoteAddr
	}
	peer, err := netip.ParseAddr(host)
	if err != nil {
		return host
	}
	if s.trusted(peer) {
		if xff := r.Header.Get("X-Forwarded-For"); xff != "" {
			parts := strings.Split(xff, ",")
			if a, err := netip.ParseAddr(strings.TrimSpace(parts[len(parts)-1])); err == nil {
				return a.String()
			}
		}
	}
	return peer.String()
}

func (s *Server) trusted(a netip.Addr) bool {
	for _, p := range s.trustedProxies {
		if p.Contains(a.Unmap()) {
			return true
		}
	}
	return false
}

// sessionStage tells the session error handler whether the application has
// already taken the request: scs reports a failure to load a session before
// the handler runs and a failure to save it while the handler writes its
// answer.
type sessionStage struct{ handled atomic.Bool }

type sessionStageKey struct{}

// withSessions loads and saves sessions around h (scs), marking when h starts
// so sessionError knows which of the two failed.
func (s *Server) withSessions(h http.Handler) http.Handler {
	inner := s.sessions.LoadAndSave(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if st, ok := r.Context().Value(sessionStageKey{}).(*sessionStage); ok {
			st.handled.Store(true)
		}
		h.ServeHTTP(w, r)
	}))
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		inner.ServeHTTP(w, r.WithContext(context.WithValue(r.Context(), sessionStageKey{}, &sessionStage{})))
	})
}

// sessionError answers a failure of the session store, which is PostgreSQL.
// When a session cannot be loaded (the database is down) nothing else can
// work either: the 503 page says so. When a session cannot be saved after the
// handler has answered (a read-only or full database refuses the idle-timeout
// refresh), the answer stands and only the refresh is lost, so pages that
// only read keep working while the database takes no changes.
func (s *Server) sessionError(w http.ResponseWriter, r *http.Request, err error) {
	if st, ok := r.Context().Value(sessionStageKey{}).(*sessionStage); ok && st.handled.Load() {
		s.log.Warn("session not saved", "request_id", requestID(r.Context()), "err", err)
		return
	}
	if db.Unavailable(err) {
		err = fmt.Errorf("web: load session: %w (%w)", db.ErrUnavailable, err)
	} else {
		err = fmt.Errorf("web: load session: %w", err)
	}
	s.serveError(w, r, err)
}

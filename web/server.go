// Package web is cohortdesk's HTTP side: the chi router (routes.go lists every
// route with the roles allowed on it), handlers (one file per resource),
// middleware, and the adapter that turns errors into pages.
package web

import (
	"context"
	"log/slog"
	"net/http"
	"net/netip"
	"sync"
	"time"

	"cohortdesk/assets"
	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/views"

	"github.com/alexedwards/scs/v2"
	"github.com/go-chi/chi/v5"
	"github.com/jackc/pgx/v5/pgxpool"
)

// Store is everything the handlers need from the database, made of the small
// interfaces each handler file declares. *db.Store satisfies it.
type Store interface {
	homeStore
	healthStore
	userStore
	signInStore
	accountStore
	secondFactorStore
	adminStore
	participantStore
	importStore
	progressStore
	caseStore
	studyStore
	screeningStore
	recordingStore
	referralStore
	exportStore
	standbyStore
	metricsStore
	auditFilterStore
	activityStore
	outreachStore
}

// Config is what the server is built from.
type Config struct {
	Store          Store
	Pool           *pgxpool.Pool // for the session store; nil keeps sessions in memory (tests only)
	Logger         *slog.Logger
	Now            func() time.Time // the clock; nil means time.Now
	Session        SessionConfig
	TrustedProxies []netip.Prefix    // peers whose X-Forwarded-For is believed
	Password       credential.Params // argon2id cost for new passwords; zero means credential.DefaultParams
	DemoNote       string            // demo sign-in help shown on the sign-in page; empty in production
	// HashConcurrency bounds the password hashes computed at once (each
	// holds Password.Memory); zero means one per CPU.
	HashConcurrency int
	// Secret keys the pseudonymous referral codes (deid.Code). It must stay
	// the same for the life of the study; without one, summaries and
	// exports are refused.
	Secret []byte
	// MetricsAllow are the client addresses that may read /metrics on this
	// listener; none by default (a separate listener serves MetricsHandler).
	MetricsAllow []netip.Prefix
	// StandbyPool is the standby's pool, for the metrics; nil without one.
	StandbyPool *pgxpool.Pool
	// Outreach says which channels this server sends messages on.
	Outreach OutreachConfig
}

// Server holds the dependencies of the handlers.
type Server struct {
	store          Store
	log            *slog.Logger
	now            func() time.Time
	assets         views.AssetURLs
	router         chi.Router
	sessions       *scs.SessionManager
	trustedProxies []netip.Prefix
	pwParams       credential.Params
	demoNote       string
	routeTable     []route
	tlsCert        string
	tlsKey         string
	dummyOnce      sync.Once
	dummy          string
	secret         []byte
	metrics        *metrics
	metricsAllow   []netip.Prefix
	hashes         *hashGate
	uploads        uploadSlots
	outreach       OutreachConfig
}

// New builds the server and its routes.
func New(cfg Config) *Server {
	s := &Server{store: cfg.Store, log: cfg.Logger, now: cfg.Now, trustedProxies: cfg.TrustedProxies,
		pwParams: cfg.Password, demoNote: cfg.DemoNote, secret: cfg.Secret, metricsAllow: cfg.MetricsAllow,
		outreach: cfg.Outreach}
	s.metrics = newMetrics(s, cfg.Pool, cfg.StandbyPool)
	if s.pwParams.Memory == 0 {
		s.pwParams = credential.DefaultParams
	}
	s.hashes = newHashGate(cfg.HashConcurrency)
	s.sessions = newSessions(cfg.Pool, cfg.Session)
	s.sessions.ErrorFunc = s.sessionError
	if s.log == nil {
		s.log = slog.New(slog.DiscardHandler)
	}
	if s.now == nil {
		s.now = time.Now
	}
	s.assets = views.AssetURLs{
		CSS:  assets.URL("css/app.css"),
		JS:   assets.URL("js/app.js"),
		HTMX: assets.URL("vendor/htmx/htmx.min.js"),
		// One concern a file: the cautions, the key scheme, chart colours.
		PartCSS: []string{assets.URL("css/cautions.css"), assets.URL("css/keys.css"), assets.URL("css/charts.css")},
		PartJS:  []string{assets.URL("js/keys.js"), assets.URL("js/charts.js")},
	}
	s.router = s.buildRouter()
	return s
}

// Handler is the whole application with its middleware.
func (s *Server) Handler() http.Handler {
	var h http.Handler = s.router
	h = s.withReads(h)
	h = s.withSessions(h)
	// Refuses state-changing requests that browsers mark as cross-origin
	// (Sec-Fetch-Site, or an Origin that is not this host).
	h = http.NewCrossOriginProtection().Handler(h)
	h = s.withRecover(h)
	h = s.withReadDeadlines(h)
	h = withSecurityHeaders(h)
	h = s.withHSTS(h)
	h = s.withLogging(h)
	h = withRequestID(h)
	return h
}

// page builds the layout model every page shares.
func (s *Server) page(r *http.Request, title, area string) views.Page {
	p := views.Page{Title: title, Area: area, Assets: s.assets}
	if name, ok := r.Context().Value(keyStudy).(string); ok {
		p.Study = name
	} else if name, err := s.store.StudyName(r.Context()); err == nil {
		p.Study = name
	}
	if u, ok := userFrom(r.Context()); ok {
		p.User = &views.User{Name: u.Name, RoleLabel: u.Role.Label()}
		p.Nav = s.navFor(u.Role)
		p.Keys = s.keyHints(r, u.Role)
	}
	return p
}

// area is one entry of the main navigation. Its number key (the key scheme,
// web/keys.go) is fixed per area and printed on its tab.
type area struct {
	key, label, href, shortcut string
}

// areas are the main areas in order; each shows only to roles its landing
// route allows, so the navigation can never offer a page that answers 403.
var areas = []area{
	{"home", "Overview", "/", "1"},
	{"triage", "Triage", "/triage", "2"},
	{"participants", "Participants", "/participants", "3"},
	{"screening", "Screening", "/screening", "4"},
	{"cases", "Cases", "/cases", "5"},
	{"confirmations", "Confirmations", "/confirmations", "6"},
	{"progress", "Progress", "/progress", "7"},
	{"exports", "Exports", "/exports", "8"},
	{"admin", "Administration", "/admin", "9"},
}

func (s *Server) navFor(role cohort.Role) []views.NavItem {
	var out []views.NavItem
	for _, a := range areas {
		acc, ok := s.accessOf("GET", a.href)
		if !ok || !acc.allows(role) {
			continue
		}
		out = append(out, views.NavItem{Key: a.key, Label: a.label, Href: a.href, Key1: a.shortcut})
	}
	return out
}

// shutdownTimeout bounds how long in-flight requests may finish at shutdown.
const shutdownTimeout = 20 * time.Second

// Serve runs the HTTP server on addr until ctx ends, then shuts it down
// gracefully. ready, when not nil, receives the bound address.
func (s *Server) Serve(ctx context.Context, srv *http.Server, ready func(addr string)) error {
	return serve(ctx, srv, s.tlsCert, s.tlsKey, ready)
}

// UseTLS makes Serve answer HTTPS with the given certificate and key files.
func (s *Server) UseTLS(cert, key string) { s.tlsCert, s.tlsKey = cert, key }

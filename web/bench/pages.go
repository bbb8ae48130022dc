package bench

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"math/rand/v2"
	"net"
	"net/http"
	"net/http/cookiejar"
	"net/url"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/credential"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"
	"cohortdesk/web"

	"golang.org/x/sync/errgroup"
)

// PagesResult is the page load: server time per page under concurrent
// signed-in clients, each page beside the bare time of its store calls.
type PagesResult struct {
	Clients           int          `json:"clients"`
	Seconds           float64      `json:"seconds"`
	MaxConns          int          `json:"db_max_conns"`
	Requests          int64        `json:"requests"`
	RequestsPerSecond float64      `json:"requests_per_second"`
	ServerErrors      int64        `json:"server_errors"`    // answers 500-599
	OtherStatus       int64        `json:"other_status"`     // answers other than 200 and 5xx (redirects to sign-in, 4xx)
	TransportErrors   int64        `json:"transport_errors"` // no answer (connection refused or reset, timeout)
	Pages             []PageResult `json:"pages"`
	SQLSeconds        float64      `json:"sql_seconds"` // the baseline pass
}

// PageResult is one page's figures, times in milliseconds.
type PageResult struct {
	Name         string  `json:"name"`
	Path         string  `json:"path"`
	Requests     int64   `json:"requests"`
	ServerErrors int64   `json:"server_errors"`
	Server       Latency `json:"server_ms"` // handler entry to return, in-process, whole middleware stack
	Client       Latency `json:"client_ms"` // as the load generator saw it over loopback
	SQL          Latency `json:"sql_ms"`    // the page's store calls, made directly the same number of times
	SQLCalls     int64   `json:"sql_calls"`
	// RatioP50 is the page's median server time over the median time of its
	// store calls: what HTTP, sessions, access checks and rendering add.
	RatioP50 float64 `json:"ratio_p50"`
}

// pageHeader carries the page's name from the load generator to the timing
// middleware.
const pageHeader = "X-Bench-Page"

// page is one of the main pages: how to address it and which store calls its
// handler makes, in the handler's order.
type page struct {
	name string
	path string // %d is replaced by an id from ids
	ids  []int64
	sql  func(ctx context.Context, id int64) error
}

// mainPages lists the main pages a coordinator works with and, for each, the
// store methods its handler calls (web/*.go): the access check (UserByID),
// the layout (StudyName), then the page's own reads and audit writes. Kept in
// step with the handlers by hand; the session store's load and save, which
// every request also makes, are in the server time but not here.
func mainPages(store *db.Store, c synthCohort, u db.User) []page {
	actor := u.Actor("127.0.0.1", "bench")
	common := func(ctx context.Context) error {
		if _, err := store.UserByID(ctx, u.ID); err != nil {
			return err
		}
		_, err := store.StudyName(ctx)
		return err
	}
	participantIDs := append(append([]int64(nil), c.Flagged...), wearIDs(c)...)
	return []page{
		{name: "overview", path: "/", sql: func(ctx context.Context, _ int64) error {
			if err := common(ctx); err != nil {
				return err
			}
			if _, err := store.Counts(ctx); err != nil {
				return err
			}
			// A coordinator's start page also counts the day's work and
			// shows the latest import.
			if _, err := store.Triage(ctx, 1, u.ID); err != nil {
				return err
			}
			_, err := store.Imports(ctx, 1)
			return err
		}},
		{name: "triage", path: "/triage", sql: func(ctx context.Context, _ int64) error {
			if err := common(ctx); err != nil {
				return err
			}
			t, err := store.Triage(ctx, 25, u.ID)
			if err != nil {
				return err
			}
			if _, err := store.CaseWorkers(ctx); err != nil {
				return err
			}
			// The rows' one-step messages and the morning-summary choice.
			ids := make([]int64, len(t.Rows))
			for i, r := range t.Rows {
				ids[i] = r.ID
			}
			if _, err := store.Reaches(ctx, ids); err != nil {
				return err
			}
			if _, err := store.StudySettings(ctx); err != nil {
				return err
			}
			_, err = store.MorningSummaryWanted(ctx, actor.UserID)
			return err
		}},
		{name: "participants", path: "/participants", sql: func(ctx context.Context, _ int64) error {
			if err := common(ctx); err != nil {
				return err
			}
			pg, err := store.Participants(ctx, db.ParticipantFilter{WithNames: true})
			if err != nil {
				return err
			}
			if _, err := store.Sites(ctx); err != nil {
				return err
			}
			if _, err := store.StudySettings(ctx); err != nil {
				return err
			}
			ids := make([]int64, len(pg.Rows))
			for i, p := range pg.Rows {
				ids[i] = p.ID
			}
			return store.Audit(ctx, actor, "participant.list_phi", "participant_list", "", nil, map[string]any{"participant_ids": ids})
		}},
		{name: "cases", path: "/cases", sql: func(ctx context.Context, _ int64) error {
			if err := common(ctx); err != nil {
				return err
			}
			if _, err := store.Cases(ctx, db.CaseFilter{}); err != nil {
				return err
			}
			if _, err := store.StudySettings(ctx); err != nil {
				return err
			}
			if _, err := store.Sites(ctx); err != nil {
				return err
			}
			_, err := store.CaseWorkers(ctx)
			return err
		}},
		{name: "progress", path: "/progress", sql: func(ctx context.Context, _ int64) error {
			if err := common(ctx); err != nil {
				return err
			}
			// The page makes its four reads side by side (web/progress.go).
			g, ctx := errgroup.WithContext(ctx)
			g.Go(func() error { _, err := store.Enrolment(ctx, cohort.Date{}); return err })
			g.Go(func() error { _, err := store.DataSufficiency(ctx); return err })
			g.Go(func() error { _, err := store.SilentParticipants(ctx, 14); return err })
			g.Go(func() error {
				// The cascade drawn on the page (active protocol, all sites).
				if _, err := store.Sites(ctx); err != nil {
					return err
				}
				_, err := store.Cascade(ctx, cascade.Filter{})
				return err
			})
			return g.Wait()
		}},
		{name: "participant", path: "/participants/%d", ids: participantIDs, sql: func(ctx context.Context, id int64) error {
			if err := common(ctx); err != nil {
				return err
			}
			p, err := store.Participant(ctx, id)
			if err != nil {
				return err
			}
			if _, err := store.StudySettings(ctx); err != nil {
				return err
			}
			if _, err := store.Identity(ctx, actor, id, "participant page"); err != nil {
				return err
			}
			lines, err := store.Timeline(ctx, p)
			if err != nil {
				return err
			}
			if _, err := store.ExternalVerdicts(ctx, id); err != nil {
				return err
			}
			pv, err := store.ActiveProtocol(ctx)
			if err != nil {
				return err
			}
			if _, err := store.ScreenResults(ctx, id, pv.ID); err != nil {
				return err
			}
			if wk, ok := chartWeek(lines); ok {
				if _, err := store.WearWeek(ctx, p, wk); err != nil {
					return err
				}
			}
			_, err = store.Notes(ctx, id)
			return err
		}},
		{name: "case", path: "/cases/%d", ids: c.WorkingCases, sql: func(ctx context.Context, id int64) error {
			if err := common(ctx); err != nil {
				return err
			}
			cs, err := store.Case(ctx, id)
			if err != nil {
				return err
			}
			st, err := store.StudySettings(ctx)
			if err != nil {
				return err
			}
			if _, err := store.Identity(ctx, actor, cs.ParticipantID, "case page"); err != nil {
				return err
			}
			if _, err := store.CaseWorkers(ctx); err != nil {
				return err
			}
			if _, err := store.FlaggedWeeks(ctx, cs.ParticipantID); err != nil {
				return err
			}
			if _, err := store.Reaches(ctx, []int64{cs.ID}); err != nil { // the messages panel
				return err
			}
			_, err = store.CaseTimeline(ctx, cs, st.Location())
			return err
		}},
	}
}

// PageNames are the names of the main pages, in the order the load visits
// them.
var PageNames = []string{"overview", "triage", "participants", "cases", "progress", "participant", "case"}

// pickPages keeps the pages named in only (all when empty).
func pickPages(all []page, only []string) ([]page, error) {
	if len(only) == 0 {
		return all, nil
	}
	var out []page
	for _, name := range only {
		found := false
		for _, p := range all {
			if p.name == name {
				out, found = append(out, p), true
			}
		}
		if !found {
			return nil, fmt.Errorf("bench: no page named %q; the pages are %s", name, strings.Join(PageNames, ", "))
		}
	}
	return out, nil
}

func wearIDs(c synthCohort) []int64 {
	out := make([]int64, len(c.Wear))
	for i, p := range c.Wear {
		out[i] = p.ID
	}
	return out
}

// chartWeek is the week whose heart rate the participant page draws (as
// web's defaultChartWeek picks it): the latest positive week, else the latest
// with readings; ok is false when that week has no heart rate to read.
func chartWeek(lines []db.WeekLine) (int, bool) {
	best := -1
	for _, l := range lines {
		if l.Verdict == screen.Positive {
			best = l.Week
		}
	}
	if best < 0 {
		for _, l := range lines {
			if l.Readings > 0 {
				best = l.Week
			}
		}
	}
	for _, l := range lines {
		if l.Week == best {
			return best, l.HRCount > 0
		}
	}
	return 0, false
}

// recorder collects samples per page from many goroutines.
type recorder struct {
	mu      sync.Mutex
	samples map[string][]time.Duration
	status  map[string]map[int]int64
}

func newRecorder() *recorder {
	return &recorder{samples: map[string][]time.Duration{}, status: map[string]map[int]int64{}}
}

func (r *recorder) add(name string, d time.Duration, status int) {
	r.mu.Lock()
	r.samples[name] = append(r.samples[name], d)
	if status != 0 {
		if r.status[name] == nil {
			r.status[name] = map[int]int64{}
		}
		r.status[name][status]++
	}
	r.mu.Unlock()
}

// statusWriter remembers the status a handler wrote.
type statusWriter struct {
	http.ResponseWriter
	status int
}

func (w *statusWriter) WriteHeader(code int) {
	if w.status == 0 {
		w.status = code
	}
	w.ResponseWriter.WriteHeader(code)
}

func (w *statusWriter) Write(b []byte) (int, error) {
	if w.status == 0 {
		w.status = http.StatusOK
	}
	return w.ResponseWriter.Write(b)
}

// timed measures the server time of requests the load generator marked.
func timed(h http.Handler, rec *recorder) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		name := r.Header.Get(pageHeader)
		if name == "" {
			h.ServeHTTP(w, r)
			return
		}
		sw := &statusWriter{ResponseWriter: w}
		start := time.Now()
		h.ServeHTTP(sw, r)
		rec.add(name, time.Since(start), sw.status)
	})
}

// measurePages serves the app on a loopback port, signs in o.Clients clients
// and lets each request the main pages in turn (ids drawn at random) until
// o.Duration has passed; then it makes each page's store calls directly, as
// many times as the page was served, from as many goroutines.
func measurePages(ctx context.Context, store *db.Store, c synthCohort, o Options, say func(string, ...any)) (*PagesResult, error) {
	srv := web.New(web.Config{Store: store, Pool: store.Pool(), Logger: slog.New(slog.DiscardHandler), Password: credential.TestParams})
	server := newRecorder()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return nil, fmt.Errorf("bench: %w", err)
	}
	hs := web.NewHTTPServer(ln.Addr().String(), timed(srv.Handler(), server))
	go func() { _ = hs.Serve(ln) }()
	defer hs.Close()
	base := "http://" + ln.Addr().String()

	pages, err := pickPages(mainPages(store, c, c.Coordinators[0]), o.Only)
	if err != nil {
		return nil, err
	}
	for _, p := range pages {
		if strings.Contains(p.path, "%d") && len(p.ids) == 0 {
			return nil, fmt.Errorf("bench: no ids for the %s page (the cohort has no cases or participants to show)", p.name)
		}
	}
	tr := &http.Transport{MaxIdleConns: o.Clients * 2, MaxIdleConnsPerHost: o.Clients * 2, IdleConnTimeout: time.Minute, DisableCompression: true}
	defer tr.CloseIdleConnections()
	say("signing in %d clients ...", o.Clients)
	clients := make([]*http.Client, o.Clients)
	signErr := make(chan error, o.Clients)
	var wg sync.WaitGroup
	for i := range clients {
		jar, _ := cookiejar.New(nil)
		clients[i] = &http.Client{Transport: tr, Jar: jar, Timeout: time.Minute,
			CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}
		// One after another: the server bounds the password hashes it
		// computes at once and paces many sign-ins to one account, and the
		// sign-ins are not what the bench measures.
		wg.Wait()
		wg.Go(func() {
			u := c.Coordinators[i%len(c.Coordinators)]
			res, err := clients[i].PostForm(base+"/signin", url.Values{"email": {u.Email}, "password": {Password}})
			if err != nil {
				signErr <- err
				return
			}
			res.Body.Close()
			if res.StatusCode != http.StatusSeeOther {
				signErr <- fmt.Errorf("bench: sign-in of client %d: status %d", i, res.StatusCode)
			}
		})
	}
	wg.Wait()
	close(signErr)
	if err := <-signErr; err != nil {
		return nil, err
	}

	say("%d clients request the main pages for %s ...", o.Clients, o.Duration)
	client := newRecorder()
	var transportErrs atomic.Int64
	lctx, cancel := context.WithTimeout(ctx, o.Duration)
	defer cancel()
	start := time.Now()
	for i, cl := range clients {
		wg.Go(func() {
			r := rand.New(rand.NewPCG(o.Seed, uint64(i)))
			for k := i; lctx.Err() == nil; k++ {
				p := pages[k%len(pages)]
				path := p.path
				if len(p.ids) > 0 {
					path = fmt.Sprintf(p.path, p.ids[r.IntN(len(p.ids))])
				}
				req, _ := http.NewRequestWithContext(ctx, http.MethodGet, base+path, nil)
				req.Header.Set(pageHeader, p.name)
				t := time.Now()
				res, err := cl.Do(req)
				if err != nil {
					transportErrs.Add(1)
					continue
				}
				_, _ = io.Copy(io.Discard, res.Body)
				res.Body.Close()
				client.add(p.name, time.Since(t), res.StatusCode)
			}
		})
	}
	wg.Wait()
	elapsed := time.Since(start)

	out := &PagesResult{Clients: o.Clients, Seconds: elapsed.Seconds(), MaxConns: o.MaxConns, TransportErrors: transportErrs.Load()}
	counts := make([]int64, len(pages))
	for i, p := range pages {
		pr := PageResult{Name: p.name, Path: strings.ReplaceAll(p.path, "%d", "{id}")}
		for status, n := range client.status[p.name] {
			pr.Requests += n
			switch {
			case status >= 500:
				pr.ServerErrors += n
			case status != http.StatusOK:
				out.OtherStatus += n
			}
		}
		counts[i] = client.status[p.name][http.StatusOK]
		pr.Server = latency(server.samples[p.name])
		pr.Client = latency(client.samples[p.name])
		out.Requests += pr.Requests
		out.ServerErrors += pr.ServerErrors
		out.Pages = append(out.Pages, pr)
	}
	out.RequestsPerSecond = float64(out.Requests) / elapsed.Seconds()
	say("%d requests (%.0f/s), %d server errors, %d other answers, %d without an answer",
		out.Requests, out.RequestsPerSecond, out.ServerErrors, out.OtherStatus, out.TransportErrors)

	say("the same store calls, made directly, as many times, from %d goroutines ...", o.Clients)
	sql := newRecorder()
	remaining := make([]atomic.Int64, len(pages))
	for i, n := range counts {
		remaining[i].Store(n)
	}
	var sqlErr atomic.Value
	t0 := time.Now()
	for i := 0; i < o.Clients; i++ {
		wg.Go(func() {
			r := rand.New(rand.NewPCG(o.Seed, uint64(i)+1<<32))
			for k := i; ctx.Err() == nil; k++ {
				did := false
				for j := range pages {
					pi := (k + j) % len(pages)
					if remaining[pi].Add(-1) < 0 {
						continue
					}
					did = true
					p := pages[pi]
					var id int64
					if len(p.ids) > 0 {
						id = p.ids[r.IntN(len(p.ids))]
					}
					t := time.Now()
					if err := p.sql(ctx, id); err != nil {
						sqlErr.CompareAndSwap(nil, err)
						return
					}
					sql.add(p.name, time.Since(t), 0)
					break
				}
				if !did {
					return
				}
			}
		})
	}
	wg.Wait()
	out.SQLSeconds = time.Since(t0).Seconds()
	if err, _ := sqlErr.Load().(error); err != nil {
		return nil, fmt.Errorf("bench: store calls of a page: %w", err)
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	for i := range out.Pages {
		pr := &out.Pages[i]
		pr.SQL = latency(sql.samples[pr.Name])
		pr.SQLCalls = int64(len(sql.samples[pr.Name]))
		if pr.SQL.P50 > 0 {
			pr.RatioP50 = pr.Server.P50 / pr.SQL.P50
		}
	}
	return out, nil
}

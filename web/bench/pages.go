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
	"runtime"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/web"
)

// PagesResult is one page load: server time per page under a number of
// concurrent signed-in clients, with the database round trips each page
// made and the time spent waiting for them.
type PagesResult struct {
	Clients           int          `json:"clients"`
	Seconds           float64      `json:"seconds"`
	MaxConns          int          `json:"db_max_conns"`
	Requests          int64        `json:"requests"`
	RequestsPerSecond float64      `json:"requests_per_second"`
	PerCPU            float64      `json:"requests_per_second_per_cpu"` // RequestsPerSecond over the machine's CPUs
	ServerErrors      int64        `json:"server_errors"`               // answers 500-599
	OtherStatus       int64        `json:"other_status"`                // answers other than 200 and 5xx (redirects to sign-in, 4xx)
	TransportErrors   int64        `json:"transport_errors"`            // no answer (connection refused or reset, timeout)
	Pages             []PageResult `json:"pages"`
}

// PageResult is one page's figures, times in milliseconds.
type PageResult struct {
	Name         string  `json:"name"`
	Path         string  `json:"path"`
	Requests     int64   `json:"requests"`
	ServerErrors int64   `json:"server_errors"`
	Server       Latency `json:"server_ms"` // handler entry to return, in-process, whole middleware stack
	Client       Latency `json:"client_ms"` // as the load generator saw it over loopback
	// Calls is the mean number of database round trips a request of the
	// page made (a query, a batch of queries sent together, a COPY: one
	// each; the session's load and save included); DB the time a request
	// spent waiting for them, summed.
	Calls float64 `json:"store_calls"`
	DB    Latency `json:"db_ms"`
}

// pageHeader carries the page's name from the load generator to the timing
// middleware.
const pageHeader = "X-Bench-Page"

// page is one of the main pages and how to address it.
type page struct {
	name string
	path string // %d is replaced by an id from ids
	ids  []int64
}

// mainPages lists the main pages a coordinator works with.
func mainPages(c synthCohort) []page {
	participantIDs := append(append([]int64(nil), c.Flagged...), wearIDs(c)...)
	return []page{
		{name: "overview", path: "/"},
		{name: "triage", path: "/triage"},
		{name: "participants", path: "/participants"},
		{name: "cases", path: "/cases"},
		{name: "progress", path: "/progress"},
		{name: "statistics", path: "/confirmations/statistics"},
		{name: "participant", path: "/participants/%d", ids: participantIDs},
		{name: "case", path: "/cases/%d", ids: c.WorkingCases},
	}
}

// PageNames are the names of the main pages, in the order the load visits
// them.
var PageNames = []string{"overview", "triage", "participants", "cases", "progress", "statistics", "participant", "case"}

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

// recorder collects samples per page from many goroutines.
type recorder struct {
	mu      sync.Mutex
	samples map[string][]time.Duration
	status  map[string]map[int]int64
	calls   map[string]int64
	db      map[string][]time.Duration
}

func newRecorder() *recorder {
	return &recorder{samples: map[string][]time.Duration{}, status: map[string]map[int]int64{},
		calls: map[string]int64{}, db: map[string][]time.Duration{}}
}

func (r *recorder) addCalls(name string, c *db.Calls) {
	r.mu.Lock()
	r.calls[name] += c.Count()
	r.db[name] = append(r.db[name], c.Time())
	r.mu.Unlock()
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
		var calls db.Calls
		start := time.Now()
		h.ServeHTTP(sw, r.WithContext(db.WithCalls(r.Context(), &calls)))
		rec.add(name, time.Since(start), sw.status)
		rec.addCalls(name, &calls)
	})
}

// measurePages serves the app on a loopback port, signs in clients clients
// and lets each request the main pages in turn (ids drawn at random) until
// o.Duration has passed.
func measurePages(ctx context.Context, store *db.Store, c synthCohort, o Options, clients int, say func(string, ...any)) (*PagesResult, error) {
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

	pages, err := pickPages(mainPages(c), o.Only)
	if err != nil {
		return nil, err
	}
	for _, p := range pages {
		if strings.Contains(p.path, "%d") && len(p.ids) == 0 {
			return nil, fmt.Errorf("bench: no ids for the %s page (the cohort has no cases or participants to show)", p.name)
		}
	}
	tr := &http.Transport{MaxIdleConns: clients * 2, MaxIdleConnsPerHost: clients * 2, IdleConnTimeout: time.Minute, DisableCompression: true}
	defer tr.CloseIdleConnections()
	say("signing in %d clients ...", clients)
	cls := make([]*http.Client, clients)
	signErr := make(chan error, clients)
	var wg sync.WaitGroup
	for i := range cls {
		jar, _ := cookiejar.New(nil)
		cls[i] = &http.Client{Transport: tr, Jar: jar, Timeout: time.Minute,
			CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}
		// One after another: the server bounds the password hashes it
		// computes at once and paces many sign-ins to one account, and the
		// sign-ins are not what the bench measures.
		wg.Wait()
		wg.Go(func() {
			u := c.Coordinators[i%len(c.Coordinators)]
			res, err := cls[i].PostForm(base+"/signin", url.Values{"email": {u.Email}, "password": {Password}})
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

	say("%d clients request the main pages for %s ...", clients, o.Duration)
	client := newRecorder()
	var transportErrs atomic.Int64
	lctx, cancel := context.WithTimeout(ctx, o.Duration)
	defer cancel()
	start := time.Now()
	for i, cl := range cls {
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

	out := &PagesResult{Clients: clients, Seconds: elapsed.Seconds(), MaxConns: o.MaxConns, TransportErrors: transportErrs.Load()}
	for _, p := range pages {
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
		pr.Server = latency(server.samples[p.name])
		pr.Client = latency(client.samples[p.name])
		pr.DB = latency(server.db[p.name])
		if n := len(server.db[p.name]); n > 0 {
			pr.Calls = float64(server.calls[p.name]) / float64(n)
		}
		out.Requests += pr.Requests
		out.ServerErrors += pr.ServerErrors
		out.Pages = append(out.Pages, pr)
	}
	out.RequestsPerSecond = float64(out.Requests) / elapsed.Seconds()
	out.PerCPU = out.RequestsPerSecond / float64(runtime.NumCPU())
	say("%d requests (%.0f/s, %.0f/s per CPU), %d server errors, %d other answers, %d without an answer",
		out.Requests, out.RequestsPerSecond, out.PerCPU, out.ServerErrors, out.OtherStatus, out.TransportErrors)
	return out, nil
}

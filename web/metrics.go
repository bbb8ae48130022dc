package web

import (
	"context"
	"net/http"
	"net/netip"
	"strconv"
	"time"

	"cohortdesk/db"

	"github.com/go-chi/chi/v5"
	"github.com/jackc/pgx/v5/pgxpool"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/promhttp"
)

// metricsStore is what the metrics read at each scrape.
type metricsStore interface {
	Queue(ctx context.Context) (db.QueueState, error)
	Pending(ctx context.Context) (db.FiguresPending, error)
}

// metrics is the server's Prometheus registry and the request timer.
type metrics struct {
	reg      *prometheus.Registry
	requests *prometheus.HistogramVec
}

// newMetrics registers everything operations watch: request durations by
// route pattern, the database pools, round trips, the job queue, import and
// screening throughput, the standby and its fallbacks, and the kept figures
// still waiting to be computed.
func newMetrics(s *Server, pool, standby *pgxpool.Pool) *metrics {
	m := &metrics{reg: prometheus.NewRegistry()}
	m.requests = prometheus.NewHistogramVec(prometheus.HistogramOpts{
		Name:    "cohortdesk_http_request_duration_seconds",
		Help:    "Time from the router to the answer, by route pattern, method and status.",
		Buckets: []float64{0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10},
	}, []string{"route", "method", "status"})
	m.reg.MustRegister(m.requests, collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	pools := poolCollector{}
	if pool != nil {
		pools = append(pools, namedPool{pool, "primary"})
	}
	if standby != nil {
		pools = append(pools, namedPool{standby, "standby"})
	}
	m.reg.MustRegister(pools)
	counter := func(name, help string, f func() float64) {
		m.reg.MustRegister(prometheus.NewCounterFunc(prometheus.CounterOpts{Name: name, Help: help}, f))
	}
	counter("cohortdesk_db_round_trips_total", "Database round trips (a query, a batch sent together, a COPY).",
		func() float64 { return float64(db.AllCalls.Calls.Load()) })
	counter("cohortdesk_db_round_trip_seconds_total", "Time spent waiting for database round trips.",
		func() float64 { return time.Duration(db.AllCalls.Nanos.Load()).Seconds() })
	counter("cohortdesk_readings_imported_total", "Readings stored by imports that committed.",
		func() float64 { return float64(db.Work.ReadingsImported.Load()) })
	counter("cohortdesk_import_seconds_total", "Time the committed imports took.",
		func() float64 { return time.Duration(db.Work.ImportNanos.Load()).Seconds() })
	counter("cohortdesk_weeks_screened_total", "Participant-weeks screened and stored.",
		func() float64 { return float64(db.Work.WeeksScreened.Load()) })
	counter("cohortdesk_screening_seconds_total", "Time the screening runs took.",
		func() float64 { return time.Duration(db.Work.ScreenNanos.Load()).Seconds() })
	m.reg.MustRegister(storeCollector{s: s})
	return m
}

// route times a request by the pattern chi matched (after routing, so the
// label is the pattern, never the address with its ids).
func (m *metrics) route(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		start := time.Now()
		rec := &statusRecorder{ResponseWriter: w}
		next.ServeHTTP(rec, r)
		pattern := "unmatched"
		if rc := chi.RouteContext(r.Context()); rc != nil && rc.RoutePattern() != "" {
			pattern = rc.RoutePattern()
		}
		status := rec.status
		if status == 0 {
			status = http.StatusOK
		}
		m.requests.WithLabelValues(pattern, r.Method, strconv.Itoa(status)).Observe(time.Since(start).Seconds())
	})
}

// Handler serves the metrics in the Prometheus text format, to be put on a
// listener of its own (COHORTDESK_METRICS_ADDR) that only operations reach.
func (s *Server) MetricsHandler() http.Handler {
	return promhttp.HandlerFor(s.metrics.reg, promhttp.HandlerOpts{})
}

// metricsPage serves /metrics on the main listener to the addresses allowed
// (COHORTDESK_METRICS_ALLOW); the guard refuses everyone else.
func (s *Server) metricsPage(w http.ResponseWriter, r *http.Request) error {
	s.MetricsHandler().ServeHTTP(w, r)
	return nil
}

// mayScrape reports whether the client's address may read the metrics.
func (s *Server) mayScrape(r *http.Request) bool {
	a, err := netip.ParseAddr(s.clientAddr(r))
	if err != nil {
		return false
	}
	for _, p := range s.metricsAllow {
		if p.Contains(a.Unmap()) {
			return true
		}
	}
	return false
}

// poolCollector reports the use of the server's pgx pools.
type poolCollector []namedPool

type namedPool struct {
	pool *pgxpool.Pool
	name string
}

var (
	poolConns    = prometheus.NewDesc("cohortdesk_db_pool_connections", "Connections of the pool by state.", []string{"pool", "state"}, nil)
	poolMax      = prometheus.NewDesc("cohortdesk_db_pool_max_connections", "The pool's largest number of connections.", []string{"pool"}, nil)
	poolAcquires = prometheus.NewDesc("cohortdesk_db_pool_acquires_total", "Connections handed out by the pool.", []string{"pool"}, nil)
	poolWaits    = prometheus.NewDesc("cohortdesk_db_pool_waits_total", "Hand-outs that had to wait for a free connection.", []string{"pool"}, nil)
	poolWaited   = prometheus.NewDesc("cohortdesk_db_pool_wait_seconds_total", "Time spent waiting for a free connection.", []string{"pool"}, nil)
)

func (c poolCollector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{poolConns, poolMax, poolAcquires, poolWaits, poolWaited} {
		ch <- d
	}
}

func (c poolCollector) Collect(ch chan<- prometheus.Metric) {
	for _, p := range c {
		st := p.pool.Stat()
		ch <- prometheus.MustNewConstMetric(poolConns, prometheus.GaugeValue, float64(st.AcquiredConns()), p.name, "in_use")
		ch <- prometheus.MustNewConstMetric(poolConns, prometheus.GaugeValue, float64(st.IdleConns()), p.name, "idle")
		ch <- prometheus.MustNewConstMetric(poolConns, prometheus.GaugeValue, float64(st.ConstructingConns()), p.name, "opening")
		ch <- prometheus.MustNewConstMetric(poolMax, prometheus.GaugeValue, float64(st.MaxConns()), p.name)
		ch <- prometheus.MustNewConstMetric(poolAcquires, prometheus.CounterValue, float64(st.AcquireCount()), p.name)
		ch <- prometheus.MustNewConstMetric(poolWaits, prometheus.CounterValue, float64(st.EmptyAcquireCount()), p.name)
		ch <- prometheus.MustNewConstMetric(poolWaited, prometheus.CounterValue, st.AcquireDuration().Seconds(), p.name)
	}
}

// storeCollector reports what the store knows at scrape time: the job queue,
// the kept figures waiting, and the standby.
type storeCollector struct{ s *Server }

var (
	queueJobs     = prometheus.NewDesc("cohortdesk_jobs", "Background jobs by state.", []string{"state"}, nil)
	queueAge      = prometheus.NewDesc("cohortdesk_jobs_oldest_queued_seconds", "How long the oldest due job has waited for a worker.", nil, nil)
	figuresWait   = prometheus.NewDesc("cohortdesk_figures_pending_participants", "Participants whose kept figures wait to be computed after a bulk load.", nil, nil)
	standbyUp     = prometheus.NewDesc("cohortdesk_standby_up", "1 while pages that only read are read from the standby.", nil, nil)
	standbyLag    = prometheus.NewDesc("cohortdesk_standby_lag_seconds", "The standby's lag behind the primary at its last measurement.", nil, nil)
	standbyReads  = prometheus.NewDesc("cohortdesk_standby_reads_total", "Reads sent to the standby.", nil, nil)
	standbyFallen = prometheus.NewDesc("cohortdesk_standby_fallbacks_total", "Reads meant for the standby that went to the primary, by reason.", []string{"reason"}, nil)
	scrapeFailed  = prometheus.NewDesc("cohortdesk_scrape_errors", "1 when a figure of this scrape could not be read from the database.", []string{"figure"}, nil)
)

func (c storeCollector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{queueJobs, queueAge, figuresWait, standbyUp, standbyLag, standbyReads, standbyFallen, scrapeFailed} {
		ch <- d
	}
}

func (c storeCollector) Collect(ch chan<- prometheus.Metric) {
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer cancel()
	failed := func(figure string, err error) {
		v := 0.0
		if err != nil {
			v = 1
		}
		ch <- prometheus.MustNewConstMetric(scrapeFailed, prometheus.GaugeValue, v, figure)
	}
	q, err := c.s.store.Queue(ctx)
	failed("jobs", err)
	if err == nil {
		ch <- prometheus.MustNewConstMetric(queueJobs, prometheus.GaugeValue, float64(q.Queued), "queued")
		ch <- prometheus.MustNewConstMetric(queueJobs, prometheus.GaugeValue, float64(q.Running), "running")
		ch <- prometheus.MustNewConstMetric(queueAge, prometheus.GaugeValue, q.OldestQueued.Seconds())
	}
	p, err := c.s.store.Pending(ctx)
	failed("figures", err)
	if err == nil {
		ch <- prometheus.MustNewConstMetric(figuresWait, prometheus.GaugeValue, float64(p.Participants))
	}
	sb := c.s.store.Standby()
	if sb == nil {
		return
	}
	up := 0.0
	if sb.Up() {
		up = 1
	}
	ch <- prometheus.MustNewConstMetric(standbyUp, prometheus.GaugeValue, up)
	ch <- prometheus.MustNewConstMetric(standbyLag, prometheus.GaugeValue, sb.Lag().Seconds())
	ch <- prometheus.MustNewConstMetric(standbyReads, prometheus.CounterValue, float64(sb.Reads.Load()))
	for _, reason := range []string{db.FallbackDown, db.FallbackLag, db.FallbackError, db.FallbackOwn} {
		ch <- prometheus.MustNewConstMetric(standbyFallen, prometheus.CounterValue, float64(sb.FallbackCount(reason)), reason)
	}
}

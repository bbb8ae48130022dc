// Package bench measures cohortdesk at the scale of a large study, each figure
// beside a baseline measured in the same run on the same machine: the
// importer against plain COPY of the same readings, the screen against the
// same statistic computed in SQL with a window function, and the server time
// of the main pages under concurrent signed-in clients against the bare time
// of the store calls behind each page. The bench command of the binary runs
// it; the tests run it small.
//
// It builds its own synthetic, fictional cohort in an empty database: the
// participants, screening results and cases by SQL, the wear data of a
// subset through the importer from a generated readings file.
package bench

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"runtime"
	"runtime/pprof"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/migrations"

	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"
)

// Options choose the scale and the parts of a run.
type Options struct {
	Participants     int // in the study (default 20,000)
	Weeks            int // weeks of wear data per participant (default 12)
	WearParticipants int // participants whose wear data is generated and imported (default 500)

	Import, Screen, Pages bool // the parts to measure; the cohort is built whatever they are

	Clients  []int         // concurrent signed-in clients of each page load, one load per entry (default 1 and 50)
	Only     []string      // names of the pages to load (PageNames); empty: all
	Duration time.Duration // of the page load (default 30 s)
	MaxConns int           // database connections of the server under load (default 20, as serve)

	Seed uint64    // of the synthetic data (default 1)
	Dir  string    // folder for the generated readings file (default the system's temporary folder)
	Now  time.Time // the study's now (default the real time)

	Progress   io.Writer // a line per step while running; nil: silent
	CPUProfile string    // write a CPU profile of the page loads to this file; "": none
}

func (o *Options) defaults() {
	if o.Participants <= 0 {
		o.Participants = 20000
	}
	if o.Weeks <= 0 {
		o.Weeks = 12
	}
	if o.WearParticipants < 0 {
		o.WearParticipants = 0
	}
	if o.WearParticipants > o.Participants {
		o.WearParticipants = o.Participants
	}
	if len(o.Clients) == 0 {
		o.Clients = []int{1, 50}
	}
	if o.Duration <= 0 {
		o.Duration = 30 * time.Second
	}
	if o.MaxConns <= 0 {
		o.MaxConns = 20
	}
	if o.Seed == 0 {
		o.Seed = 1
	}
	if o.Dir == "" {
		o.Dir = os.TempDir()
	}
	if o.Now.IsZero() {
		o.Now = time.Now()
	}
}

// Report is everything a run measured; it is written as JSON.
type Report struct {
	StartedAt time.Time      `json:"started_at"`
	Machine   Machine        `json:"machine"`
	Scale     Scale          `json:"scale"`
	Build     float64        `json:"build_seconds"` // the synthetic cohort, without wear data
	Import    *ImportResult  `json:"import,omitempty"`
	Screen    *ScreenResult  `json:"screen,omitempty"`
	Pages     []*PagesResult `json:"pages,omitempty"` // one per number of clients
	// Figures is how long computing every participant's kept figures from
	// scratch took after the study was built (db.Store.RebuildFigures).
	Figures float64 `json:"figures_seconds"`
	Seconds float64 `json:"seconds"` // the whole run
}

// Machine describes where the run happened.
type Machine struct {
	OS         string `json:"os"`
	Arch       string `json:"arch"`
	CPUs       int    `json:"cpus"`
	Go         string `json:"go"`
	PostgreSQL string `json:"postgresql"`
}

// Scale is the size of the synthetic study.
type Scale struct {
	Participants     int64 `json:"participants"`
	Weeks            int   `json:"weeks"`
	WearParticipants int   `json:"wear_participants"`
	WearWeeks        int   `json:"wear_weeks"`   // participant-weeks with generated wear data
	SparseWeeks      int   `json:"sparse_weeks"` // one sparse week for each other participant who is not silent
	Readings         int64 `json:"readings"`     // wear readings imported
	ScreenResults    int64 `json:"screen_results"`
	Cases            int64 `json:"cases"`
	WorkingCases     int   `json:"working_cases"`
}

// Rate is one timed pass over some readings.
type Rate struct {
	Seconds           float64 `json:"seconds"`
	ReadingsPerSecond float64 `json:"readings_per_second"`
}

func rate(n int64, d time.Duration) Rate {
	return Rate{Seconds: d.Seconds(), ReadingsPerSecond: float64(n) / d.Seconds()}
}

// Run builds the synthetic cohort in the empty database at url (migrating it
// first) and measures the parts o asks for. The database is left with the
// cohort in it.
func Run(ctx context.Context, url string, o Options) (Report, error) {
	o.defaults()
	started := time.Now()
	rep := Report{StartedAt: started.UTC(), Machine: Machine{OS: runtime.GOOS, Arch: runtime.GOARCH, CPUs: runtime.NumCPU(), Go: runtime.Version()}}
	say := func(format string, args ...any) {
		if o.Progress != nil {
			fmt.Fprintf(o.Progress, "bench: "+format+"\n", args...)
		}
	}
	pool, err := db.Open(ctx, url, int32(o.MaxConns))
	if err != nil {
		return rep, err
	}
	defer pool.Close()
	if err := pool.QueryRow(ctx, `SHOW server_version`).Scan(&rep.Machine.PostgreSQL); err != nil {
		return rep, fmt.Errorf("bench: %w", err)
	}
	// Refuse a database in use before migrating anything in it.
	if err := mustBeEmpty(ctx, pool); err != nil {
		return rep, err
	}
	if _, err := migrations.Up(ctx, pool); err != nil {
		return rep, err
	}
	store := db.New(pool, func() time.Time { return time.Now().Add(o.Now.Sub(started)) })
	today := cohort.DateOf(o.Now.UTC())

	say("building a synthetic study of %d participants over %d weeks ...", o.Participants, o.Weeks)
	t0 := time.Now()
	c, err := buildCohort(ctx, store, o, today)
	if err != nil {
		return rep, err
	}
	rep.Build = time.Since(t0).Seconds()
	rep.Scale = Scale{Participants: c.Participants, Weeks: o.Weeks, WearParticipants: len(c.Wear), Cases: c.Cases,
		ScreenResults: c.Results, WorkingCases: len(c.WorkingCases)}
	say("built in %.1f s: %d screening results, %d cases (%d being worked)", rep.Build, c.Results, c.Cases, len(c.WorkingCases))

	if len(c.Wear) > 0 {
		wr, err := importWear(ctx, store, c, o, say)
		if err != nil {
			return rep, err
		}
		rep.Scale.Readings, rep.Scale.WearWeeks = wr.Readings, wr.weeks
		if o.Import {
			rep.Import = wr
		}
	} else if o.Import || o.Screen {
		say("no participants with wear data (-wear 0): import and screening not measured")
	}
	if rep.Scale.SparseWeeks, err = addThinWeeks(ctx, store, o, today); err != nil {
		return rep, err
	}
	if len(c.Wear) > 0 {
		switch {
		case o.Screen:
			if rep.Screen, err = measureScreen(ctx, store, wearIDs(c), say); err != nil {
				return rep, err
			}
		case o.Pages:
			// The participant pages show screening results and charts.
			if _, err := db.NewScreener(store, nil).ScreenNow(ctx, wearIDs(c), 0, nil); err != nil {
				return rep, err
			}
		}
	}
	if _, err := pool.Exec(ctx, `DROP TABLE IF EXISTS bench_plain_readings`); err != nil {
		return rep, err
	}
	// The study was built by SQL with the triggers that mark changed
	// participants off (buildCohort); every participant's kept figures are
	// computed here from scratch, as a deployment does once at start-up.
	t1 := time.Now()
	if err := store.RebuildFigures(ctx); err != nil {
		return rep, err
	}
	rep.Figures = time.Since(t1).Seconds()
	say("kept figures of %d participants computed in %.1f s", c.Participants, rep.Figures)
	if _, err := pool.Exec(ctx, `VACUUM ANALYZE figure_standings, figure_episodes, figure_recordings, figure_people, figure_box_counts,
		figure_week_counts, figure_stage_counts, figure_time_counts, figure_kappa_counts, figure_unread_counts, figures_dirty`); err != nil {
		return rep, err
	}
	if o.Pages && o.CPUProfile != "" {
		f, err := os.Create(o.CPUProfile)
		if err != nil {
			return rep, fmt.Errorf("bench: %w", err)
		}
		defer f.Close()
		if err := pprof.StartCPUProfile(f); err != nil {
			return rep, fmt.Errorf("bench: %w", err)
		}
		defer pprof.StopCPUProfile()
	}
	if o.Pages {
		for _, n := range o.Clients {
			pr, err := measurePages(ctx, store, c, o, n, say)
			if err != nil {
				return rep, err
			}
			rep.Pages = append(rep.Pages, pr)
		}
	}
	rep.Seconds = time.Since(started).Seconds()
	return rep, nil
}

// mustBeEmpty refuses a database that already holds a study: the bench adds
// thousands of fictional participants and must never meet real ones.
func mustBeEmpty(ctx context.Context, pool *pgxpool.Pool) error {
	var n int64
	err := pool.QueryRow(ctx, `SELECT (SELECT count(*) FROM participants) + (SELECT count(*) FROM study) + (SELECT count(*) FROM users)`).Scan(&n)
	var pg *pgconn.PgError
	if errors.As(err, &pg) && pg.Code == "42P01" { // undefined_table: a database never migrated
		return nil
	}
	if err != nil {
		return fmt.Errorf("bench: %w", err)
	}
	if n > 0 {
		return errors.New("bench: the database already holds a study, participants or accounts; run the bench on an empty database (or without DATABASE_URL, on a private cluster it starts itself)")
	}
	return nil
}

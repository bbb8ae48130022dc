package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
)

// runScreen re-screens stored wear data with a chosen protocol version. It
// queues a screening job like an import does and works it in this process,
// printing progress; when a server's worker claims the job first, it follows
// that worker's progress instead. Either way the job is on the progress page.
func runScreen(ctx context.Context, e env, args []string) error {
	fs := flag.NewFlagSet("screen", flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	url := fs.String("database-url", e.getenv("DATABASE_URL"), "PostgreSQL URL (env DATABASE_URL)")
	protocol := fs.Int("protocol", 0, "protocol version id (see Administration, Screening protocols); 0 means the active version")
	all := fs.Bool("all", false, "screen every participant")
	participants := fs.String("participant", "", "study IDs to screen, comma-separated")
	poll := fs.Duration("poll", time.Second, "how often progress is printed")
	fs.Usage = func() {
		fmt.Fprintln(e.stderr, "usage: cohortdesk screen [-protocol N] -all | -participant STUDY-ID[,STUDY-ID...]")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *all == (*participants != "") {
		fs.Usage()
		return errors.New("screen: give either -all or -participant")
	}
	if *poll < 10*time.Millisecond {
		*poll = 10 * time.Millisecond
	}
	store, closeDB, err := openStore(ctx, e.getenv, "screen", *url, 4)
	if err != nil {
		return err
	}
	defer closeDB()
	if _, err := store.EnsureDefaultProtocol(ctx); err != nil {
		return err
	}
	var ids []int64
	if !*all {
		for sid := range strings.SplitSeq(*participants, ",") {
			if sid = strings.TrimSpace(sid); sid == "" {
				continue
			}
			p, err := store.ParticipantByStudyID(ctx, sid)
			if errors.Is(err, cohort.ErrNotFound) {
				return fmt.Errorf("screen: no participant with study ID %q", sid)
			}
			if err != nil {
				return err
			}
			ids = append(ids, p.ID)
		}
		if len(ids) == 0 {
			return errors.New("screen: -participant names no study ID")
		}
	}
	actor := cohort.Actor{Name: "command line (" + osUser() + ")"}
	id, err := store.EnqueueScreenBy(ctx, actor, ids, *protocol)
	if errors.Is(err, cohort.ErrNotFound) {
		return fmt.Errorf("screen: there is no protocol version %d", *protocol)
	}
	if err != nil {
		return err
	}
	j, err := store.Job(ctx, id)
	if err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "job %d queued: %s\n", id, j.Label)

	// Work the job here; a server's worker may take it first, which is fine.
	w := &db.Worker{Store: store, Name: db.NewWorkerName(), Handlers: newScreener(store).Handlers(), Poll: *poll}
	local := make(chan error, 1)
	go func() {
		for {
			if _, err := w.RunOne(ctx, id); err != nil && !errors.Is(err, db.ErrJobLost) && ctx.Err() == nil {
				local <- err
				return
			}
			if ctx.Err() != nil {
				local <- nil
				return
			}
			j, err := store.Job(ctx, id)
			if err != nil || j.State == db.JobDone || j.State == db.JobFailed || ctx.Err() != nil {
				local <- err
				return
			}
			select {
			case <-ctx.Done():
			case <-time.After(*poll):
			}
		}
	}()
	last := ""
	report := func(j db.Job) {
		line := fmt.Sprintf("job %d %s: %d of %d participant-weeks", j.ID, j.State, j.Done, j.Total)
		if j.Total > 0 {
			line += fmt.Sprintf(" (%d%%)", j.Done*100/j.Total)
		}
		if j.LockedBy != "" && j.LockedBy != w.Name {
			line += " by " + j.LockedBy
		}
		if line != last {
			fmt.Fprintln(e.stdout, line)
			last = line
		}
	}
	tick := time.NewTicker(*poll)
	defer tick.Stop()
	for {
		select {
		case err := <-local:
			if err != nil {
				return fmt.Errorf("screen: %w", err)
			}
			if ctx.Err() != nil {
				return fmt.Errorf("screen: interrupted; job %d is back in the queue for the servers' workers", id)
			}
			j, err := store.Job(context.WithoutCancel(ctx), id)
			if err != nil {
				return err
			}
			report(j)
			if j.State == db.JobFailed {
				return fmt.Errorf("screen: job %d failed: %s", id, j.Error)
			}
			fmt.Fprintln(e.stdout, j.Outcome)
			// The verdicts just printed are screens: say so once.
			fmt.Fprint(e.stdout, "\n"+cohort.CautionsText())
			return nil
		case <-tick.C:
			if j, err := store.Job(ctx, id); err == nil {
				report(j)
			}
		}
	}
}

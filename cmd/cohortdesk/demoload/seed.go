// Package demoload loads the fictional demo study into an empty database through
// the application's own paths: sites and staff through the store, participants
// through enrolment, wear data through the file importer (as a readings CSV
// streamed from the generator), screening through the screening job, follow-up
// through the case actions. What the demo shows is therefore what the code does.
package demoload

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/cohort/demo"
	"cohortdesk/cohort/risk"
	"cohortdesk/db"

	"github.com/jackc/pgx/v5"
)

// Options choose the fictional study.
type Options struct {
	Seed         uint64
	Participants int
	Today        time.Time         // the study's "now"; zero means demo.DefaultToday()
	Password     string            // every demo account's password
	PasswordCost credential.Params // zero means credential.DefaultParams
	// Secret keys the pseudonymous referral codes of the summaries the
	// demo issues; without one, referred cases get no issued summary.
	Secret []byte
	Log    *slog.Logger
}

// DemoPassword is the demo accounts' password, printed by the demo command.
const DemoPassword = "demo-cohortdesk"

// Result says what was loaded.
type Result struct {
	Study        *demo.Study
	Users        []demo.User
	Readings     int64
	Participants int
	ImportID     int64
	Screened     db.ScreenSummary
	Cases        int
	Timings      map[string]time.Duration
}

// Load fills an empty database with the demo study and reports what it did.
// It refuses a database that already holds a study.
func Load(ctx context.Context, store *db.Store, o Options) (Result, error) {
	res := Result{Timings: map[string]time.Duration{}}
	if o.Log == nil {
		o.Log = slog.New(slog.DiscardHandler)
	}
	if o.Password == "" {
		o.Password = DemoPassword
	}
	if o.PasswordCost.Memory == 0 {
		o.PasswordCost = credential.DefaultParams
	}
	name, err := store.StudyName(ctx)
	if err != nil {
		return res, err
	}
	if name != "" {
		return res, fmt.Errorf("seed: the database already holds study %q", name)
	}
	step := func(label string, start time.Time) {
		res.Timings[label] = time.Since(start)
		o.Log.Info("demo load", "step", label, "took", time.Since(start).Round(time.Millisecond).String())
	}

	t0 := time.Now()
	st, err := demo.New(demo.Config{Seed: o.Seed, Participants: o.Participants, Today: o.Today})
	if err != nil {
		return res, fmt.Errorf("seed: %w", err)
	}
	res.Study = st
	actor := cohort.Actor{Name: LoaderName}
	if err := loadStudy(ctx, store, actor, st); err != nil {
		return res, err
	}
	users, err := loadUsers(ctx, store, actor, st, o)
	if err != nil {
		return res, err
	}
	res.Users = users
	// The demo's fictional staff sign in with the password alone; anyone
	// may still set up a second factor on their account page to try it.
	if err := store.SetSecondFactorRequired(ctx, actor, false); err != nil {
		return res, err
	}
	if err := loadParticipants(ctx, store, actor, st); err != nil {
		return res, err
	}
	res.Participants = len(st.Participants)
	step("study, staff and participants", t0)

	t1 := time.Now()
	rep, err := importReadings(ctx, store, actor, st)
	if err != nil {
		return res, err
	}
	res.Readings, res.ImportID = rep.Accepted, rep.ID
	step("wear data import", t1)

	t2 := time.Now()
	if _, err := importBadRows(ctx, store, actor, st); err != nil {
		return res, err
	}
	step("import of deliberately bad rows", t2)

	t3 := time.Now()
	if _, err := store.EnsureDefaultProtocol(ctx); err != nil {
		return res, err
	}
	sum, err := db.NewScreener(store, nil).ScreenNow(ctx, nil, 0, nil)
	if err != nil {
		return res, fmt.Errorf("seed: screening: %w", err)
	}
	res.Screened = sum
	step("screening", t3)

	t4 := time.Now()
	byLogin := map[string]db.User{}
	for _, u := range st.Users {
		du, err := store.UserForSignIn(ctx, u.Email)
		if err != nil {
			return res, err
		}
		byLogin[u.Login] = du
	}
	if res.Cases, err = followUps(ctx, store, st, byLogin, o.Secret); err != nil {
		return res, err
	}
	step("follow-up history", t4)

	// The follow-up history replays flags by bare SQL; their participants'
	// kept figures are computed here rather than by the server's background
	// pass, so the demo opens with every figure current.
	t5 := time.Now()
	for {
		n, err := store.DrainFigures(ctx, 1000)
		if err != nil {
			return res, err
		}
		if n == 0 {
			break
		}
	}
	step("kept figures", t5)
	return res, nil
}

func loadStudy(ctx context.Context, store *db.Store, a cohort.Actor, st *demo.Study) error {
	target := 0
	for _, s := range st.Sites {
		target += s.Target
	}
	closures := make([]string, len(st.Closures))
	for i, c := range st.Closures {
		closures[i] = c.Date.String()
	}
	err := pgx.BeginFunc(ctx, store.Pool(), func(tx pgx.Tx) error {
		_, err := tx.Exec(ctx, `INSERT INTO study (id, name, time_zone, contact_route, closure_days, enrolment_target, follow_up_weeks, paper)
			VALUES (1, $1, $2, $3, $4::date[], $5, $6, $7)`,
			st.Name, st.TimeZone, "Study coordinating office, "+st.Name+": reply through the study's secure message line quoting the referral code.",
			closures, target, demo.WearWeeks, string(demo.Paper))
		return err
	})
	if err != nil {
		return fmt.Errorf("seed: study: %w", err)
	}
	for _, s := range st.Sites {
		opened := s.Opened.In(time.UTC)
		if _, err := store.CreateSite(ctx, a, db.Site{Code: s.Code, Name: s.Name + " (" + s.Town + ")", TimeZone: s.TimeZone, Target: s.Target, OpenedOn: &opened}); err != nil {
			return fmt.Errorf("seed: site %s: %w", s.Code, err)
		}
	}
	return nil
}

func loadUsers(ctx context.Context, store *db.Store, a cohort.Actor, st *demo.Study, o Options) ([]demo.User, error) {
	for _, u := range st.Users {
		// A hash per account: each gets its own random salt, so equal
		// passwords do not give equal hashes.
		hash, err := credential.Hash(o.Password, o.PasswordCost)
		if err != nil {
			return nil, err
		}
		if _, err := store.CreateUser(ctx, a, db.NewUser{Email: u.Email, Name: u.Name, Role: u.Role, PasswordHash: hash}); err != nil {
			return nil, fmt.Errorf("seed: user %s: %w", u.Email, err)
		}
	}
	return st.Users, nil
}

// answer is an intake answer as the store keeps it: true, false, or nil when
// not recorded.
func answer(a risk.Answer) *bool {
	switch a {
	case risk.Yes:
		t := true
		return &t
	case risk.No:
		f := false
		return &f
	}
	return nil
}

func loadParticipants(ctx context.Context, store *db.Store, a cohort.Actor, st *demo.Study) error {
	sites, err := store.Sites(ctx)
	if err != nil {
		return err
	}
	siteID := map[string]int{}
	for _, s := range sites {
		siteID[s.Code] = s.ID
	}
	for _, p := range st.Participants {
		birth := p.BirthDate
		in := db.ParticipantInput{StudyID: p.StudyID, SiteID: siteID[p.Site], Sex: p.Sex, TimeZone: p.TimeZone, EnrolledOn: p.Enrolled,
			ConsentVersion: p.ConsentVersion, WatchModel: p.Watch, RRCapable: p.HasRR,
			Risk: db.Risk{Hypertension: answer(p.Intake.Hypertension), Diabetes: answer(p.Intake.Diabetes), HeartFailure: answer(p.Intake.HeartFailure),
				PriorStroke: answer(p.Intake.StrokeTIA), VascularDisease: answer(p.Intake.Vascular)},
			Identity: db.Identity{GivenName: p.GivenName, FamilyName: p.FamilyName, Phone: p.Phone, Email: p.Email, Street: p.Street,
				City: p.City, ZIP: p.ZIP, DeviceSerial: p.Serial, BirthDate: &birth}}
		enrolled, err := store.Enrol(ctx, a, in)
		if err != nil {
			return fmt.Errorf("seed: enrol %s: %w", p.StudyID, err)
		}
		if !p.Withdrawn.IsZero() {
			if _, err := store.Withdraw(ctx, a, enrolled.ID, p.Withdrawn, p.WithdrawalReason, enrolled.Version); err != nil {
				return fmt.Errorf("seed: withdraw %s: %w", p.StudyID, err)
			}
		}
	}
	return nil
}

// importReadings streams the generated wear data as a readings CSV into the
// importer, the same path a study's files take.
func importReadings(ctx context.Context, store *db.Store, a cohort.Actor, st *demo.Study) (db.ImportReport, error) {
	pr, pw := io.Pipe()
	go func() {
		w := demo.NewCSVWriter(pw)
		for _, p := range st.Participants {
			for wk := range st.Weeks(p) {
				if err := w.WriteWeek(p, wk); err != nil {
					pw.CloseWithError(err)
					return
				}
			}
		}
		pw.CloseWithError(w.Flush())
	}()
	rep, err := store.ImportReadings(ctx, a, pr, db.ImportOptions{Kind: db.ImportReadingsCSV, FileName: "demo-wear-data.csv", NoScreening: true})
	pr.Close()
	if err != nil {
		return rep, fmt.Errorf("seed: wear data: %w", err)
	}
	return rep, nil
}

// importBadRows imports a small file of deliberately faulty rows so the demo
// shows quarantine at work.
func importBadRows(ctx context.Context, store *db.Store, a cohort.Actor, st *demo.Study) (db.ImportReport, error) {
	pr, pw := io.Pipe()
	go func() {
		w := demo.NewCSVWriter(pw)
		for _, b := range st.BadRows() {
			if err := w.WriteBad(b); err != nil {
				pw.CloseWithError(err)
				return
			}
		}
		pw.CloseWithError(w.Flush())
	}()
	rep, err := store.ImportReadings(ctx, a, pr, db.ImportOptions{Kind: db.ImportReadingsCSV, FileName: "demo-late-upload-with-faults.csv", NoScreening: true})
	pr.Close()
	if err != nil {
		return rep, fmt.Errorf("seed: bad rows: %w", err)
	}
	return rep, nil
}

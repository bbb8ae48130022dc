package db

import (
	"context"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/enrolment"

	"github.com/jackc/pgx/v5"
)

// Site is a recruiting location.
type Site struct {
	ID       int
	Code     string
	Name     string
	TimeZone string
	Target   int
	OpenedOn *time.Time
}

// Sites lists the sites by code.
func (s *Store) Sites(ctx context.Context) ([]Site, error) {
	out, err := remember(ctx, "sites", func() ([]Site, error) {
		rows, err := s.reader(ctx).Query(ctx, `SELECT id, code, name, time_zone, target, opened_on FROM sites ORDER BY code`)
		if err != nil {
			return nil, mapErr("sites", err)
		}
		out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Site, error) {
			var st Site
			err := r.Scan(&st.ID, &st.Code, &st.Name, &st.TimeZone, &st.Target, &st.OpenedOn)
			return st, err
		})
		return out, mapErr("sites", err)
	})
	return slices.Clone(out), err
}

// CreateSite adds a site and audits it.
func (s *Store) CreateSite(ctx context.Context, a cohort.Actor, st Site) (Site, error) {
	var ve cohort.ValidationError
	st.Code = strings.ToUpper(strings.TrimSpace(st.Code))
	if len(st.Code) < 2 || len(st.Code) > 8 || strings.Trim(st.Code, "ABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789") != "" {
		ve.Add("code", "use 2 to 8 capital letters or digits")
	}
	if strings.TrimSpace(st.Name) == "" {
		ve.Add("name", "enter the site's name")
	}
	if _, err := time.LoadLocation(st.TimeZone); err != nil || st.TimeZone == "" {
		ve.Add("time_zone", "enter a time zone such as America/Chicago")
	}
	if st.Target < 0 {
		ve.Add("target", "the target cannot be negative")
	}
	if err := ve.Err(); err != nil {
		return Site{}, err
	}
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		if err := tx.QueryRow(ctx, `INSERT INTO sites (code, name, time_zone, target, opened_on) VALUES ($1, $2, $3, $4, $5) RETURNING id`,
			st.Code, strings.TrimSpace(st.Name), st.TimeZone, st.Target, st.OpenedOn).Scan(&st.ID); err != nil {
			return err
		}
		return audit(ctx, tx, a, "site.create", "site", strconv.Itoa(st.ID), nil, st)
	})
	return st, mapErr("create site", err)
}

// Risk holds the intake answers used as stroke-risk factors; nil is unanswered.
type Risk struct {
	Hypertension    *bool `json:"hypertension"`
	Diabetes        *bool `json:"diabetes"`
	HeartFailure    *bool `json:"heart_failure"`
	PriorStroke     *bool `json:"prior_stroke"`
	VascularDisease *bool `json:"vascular_disease"`
}

// Participant is an enrolled person without identifying details: safe for every
// staff role.
type Participant struct {
	ID               int64        `json:"id"`
	StudyID          string       `json:"study_id"`
	SiteID           int          `json:"site_id"`
	SiteCode         string       `json:"site_code"`
	Sex              cohort.Sex   `json:"sex"`
	AgeAtEnrolment   *int         `json:"age_at_enrolment"`
	TimeZone         string       `json:"time_zone"`
	EnrolledOn       cohort.Date  `json:"enrolled_on"`
	ConsentVersion   string       `json:"consent_version"`
	WithdrawnOn      *cohort.Date `json:"withdrawn_on"`
	WithdrawalReason string       `json:"withdrawal_reason"`
	Risk             Risk         `json:"risk"`
	WatchModel       string       `json:"watch_model"`
	RRCapable        bool         `json:"rr_capable"`
	Version          int          `json:"version"`
}

// Location is the participant's time zone (UTC when unreadable).
func (p Participant) Location() *time.Location {
	loc, err := time.LoadLocation(p.TimeZone)
	if err != nil {
		return time.UTC
	}
	return loc
}

// Identity is the protected health information of a participant.
type Identity struct {
	GivenName    string       `json:"given_name"`
	FamilyName   string       `json:"family_name"`
	BirthDate    *cohort.Date `json:"birth_date"`
	Phone        string       `json:"phone"`
	Email        string       `json:"email"`
	Street       string       `json:"street"`
	City         string       `json:"city"`
	ZIP          string       `json:"zip"`
	DeviceSerial string       `json:"device_serial"`
}

// FullName joins the names for display.
func (i Identity) FullName() string { return strings.TrimSpace(i.GivenName + " " + i.FamilyName) }

const participantCols = `p.id, p.study_id, p.site_id, st.code, p.sex, p.age_at_enrolment, p.time_zone, p.enrolled_on,
	p.consent_version, p.withdrawn_on, p.withdrawal_reason, p.hypertension, p.diabetes, p.heart_failure,
	p.prior_stroke, p.vascular_disease, p.watch_model, p.rr_capable, p.version`

func scanParticipant(row pgx.Row, extra ...any) (Participant, error) {
	var p Participant
	var sex string
	var age *int16
	var enrolled time.Time
	var withdrawn *time.Time
	dest := []any{&p.ID, &p.StudyID, &p.SiteID, &p.SiteCode, &sex, &age, &p.TimeZone, &enrolled,
		&p.ConsentVersion, &withdrawn, &p.WithdrawalReason, &p.Risk.Hypertension, &p.Risk.Diabetes,
		&p.Risk.HeartFailure, &p.Risk.PriorStroke, &p.Risk.VascularDisease, &p.WatchModel, &p.RRCapable, &p.Version}
	if err := row.Scan(append(dest, extra...)...); err != nil {
		return p, err
	}
	p.Sex = cohort.Sex(sex)
	if age != nil {
		a := int(*age)
		p.AgeAtEnrolment = &a
	}
	p.EnrolledOn = cohort.DateOf(enrolled)
	if withdrawn != nil {
		d := cohort.DateOf(*withdrawn)
		p.WithdrawnOn = &d
	}
	return p, nil
}

// Participant returns one participant without PHI.
func (s *Store) Participant(ctx context.Context, id int64) (Participant, error) {
	row := s.reader(ctx).QueryRow(ctx, `SELECT `+participantCols+` FROM participants p JOIN sites st ON st.id = p.site_id WHERE p.id = $1`, id)
	p, err := scanParticipant(row)
	return p, mapErr("participant", err)
}

// ParticipantByStudyID returns one participant without PHI.
func (s *Store) ParticipantByStudyID(ctx context.Context, studyID string) (Participant, error) {
	row := s.reader(ctx).QueryRow(ctx, `SELECT `+participantCols+` FROM participants p JOIN sites st ON st.id = p.site_id WHERE p.study_id = $1`, strings.TrimSpace(studyID))
	p, err := scanParticipant(row)
	return p, mapErr("participant", err)
}

// Identity returns a participant's PHI to a role allowed to see it, and records
// the view in the audit trail. This is the only reader of participant_identity
// for display; refusing other roles here keeps the rule in one place.
func (s *Store) Identity(ctx context.Context, a cohort.Actor, participantID int64, purpose string) (Identity, error) {
	var id Identity
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		id, err = identityIn(ctx, tx, a, participantID, purpose)
		return err
	})
	return id, mapErr("identity", err)
}

// identityIn is Identity inside the caller's transaction, for a change that
// uses the details (a message made out to the participant): the role check
// and the audited view are the same.
func identityIn(ctx context.Context, tx pgx.Tx, a cohort.Actor, participantID int64, purpose string) (Identity, error) {
	if !a.Role.SeesPHI() {
		return Identity{}, fmt.Errorf("db: identity: role %s: %w", a.Role, cohort.ErrForbidden)
	}
	var id Identity
	var birth *time.Time
	err := tx.QueryRow(ctx, `SELECT given_name, family_name, birth_date, phone, email, street, city, zip, device_serial
		FROM participant_identity WHERE participant_id = $1`, participantID).
		Scan(&id.GivenName, &id.FamilyName, &birth, &id.Phone, &id.Email, &id.Street, &id.City, &id.ZIP, &id.DeviceSerial)
	if err != nil && err != pgx.ErrNoRows {
		return id, err
	}
	if birth != nil {
		d := cohort.DateOf(*birth)
		id.BirthDate = &d
	}
	return id, audit(ctx, tx, a, "participant.view_phi", "participant", strconv.FormatInt(participantID, 10), nil, map[string]string{"purpose": purpose})
}

// ParticipantInput is the enrol and edit form, read.
type ParticipantInput struct {
	StudyID        string
	SiteID         int
	Sex            cohort.Sex
	TimeZone       string
	EnrolledOn     cohort.Date
	ConsentVersion string
	Risk           Risk
	WatchModel     string
	RRCapable      bool
	Identity       Identity // PHI, with the birth date
	Version        int      // for edits: the version the editor saw
}

// Check applies the enrolment rules (enrolment.Enrolment.Check) on the day
// today. The store applies them to every enrolment and edit; a form applies
// them to word every problem of a refused form at once.
func (in ParticipantInput) Check(today cohort.Date) error {
	return enrolment.Enrolment{StudyID: in.StudyID, SiteID: in.SiteID, Sex: in.Sex, TimeZone: in.TimeZone, EnrolledOn: in.EnrolledOn,
		BirthDate: in.Identity.BirthDate, ZIP: in.Identity.ZIP, Email: in.Identity.Email}.Check(today)
}

func dateArg(d *cohort.Date) any {
	if d == nil {
		return nil
	}
	return d.String()
}

// Enrol adds a participant with their identifying details and audits it (the
// audit keeps which fields were set, never the PHI values themselves).
func (s *Store) Enrol(ctx context.Context, a cohort.Actor, in ParticipantInput) (Participant, error) {
	in.StudyID = strings.TrimSpace(in.StudyID)
	if err := in.Check(cohort.DateOf(s.now())); err != nil {
		return Participant{}, err
	}
	enrolled, birth := in.EnrolledOn, in.Identity.BirthDate
	var id int64
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		err := tx.QueryRow(ctx, `
			INSERT INTO participants (study_id, site_id, sex, age_at_enrolment, time_zone, enrolled_on, consent_version,
			  hypertension, diabetes, heart_failure, prior_stroke, vascular_disease, watch_model, rr_capable)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14) RETURNING id`,
			in.StudyID, in.SiteID, string(in.Sex), enrolment.AgeAt(birth, enrolled), in.TimeZone, enrolled.String(), in.ConsentVersion,
			in.Risk.Hypertension, in.Risk.Diabetes, in.Risk.HeartFailure, in.Risk.PriorStroke, in.Risk.VascularDisease,
			in.WatchModel, in.RRCapable).Scan(&id)
		if err != nil {
			return err
		}
		if err := writeIdentity(ctx, tx, id, in.Identity, birth); err != nil {
			return err
		}
		return audit(ctx, tx, a, "participant.enrol", "participant", strconv.FormatInt(id, 10), nil,
			map[string]any{"study_id": in.StudyID, "site_id": in.SiteID, "enrolled_on": enrolled.String(), "phi_fields_set": phiFieldsSet(in.Identity, birth)})
	})
	if err != nil {
		return Participant{}, mapErr("enrol", err)
	}
	return s.Participant(ctx, id)
}

func writeIdentity(ctx context.Context, tx pgx.Tx, id int64, i Identity, birth *cohort.Date) error {
	_, err := tx.Exec(ctx, `
		INSERT INTO participant_identity (participant_id, given_name, family_name, birth_date, phone, email, street, city, zip, device_serial)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10)
		ON CONFLICT (participant_id) DO UPDATE SET given_name = $2, family_name = $3, birth_date = $4, phone = $5,
		  email = $6, street = $7, city = $8, zip = $9, device_serial = $10`,
		id, strings.TrimSpace(i.GivenName), strings.TrimSpace(i.FamilyName), dateArg(birth), strings.TrimSpace(i.Phone),
		strings.TrimSpace(i.Email), strings.TrimSpace(i.Street), strings.TrimSpace(i.City), strings.TrimSpace(i.ZIP), strings.TrimSpace(i.DeviceSerial))
	return err
}

// phiFieldsSet names the PHI fields that hold a value, for the audit trail,
// which must not itself become a copy of the PHI.
func phiFieldsSet(i Identity, birth *cohort.Date) []string {
	var out []string
	for _, f := range []struct {
		name string
		set  bool
	}{{"given_name", i.GivenName != ""}, {"family_name", i.FamilyName != ""}, {"birth_date", birth != nil},
		{"phone", i.Phone != ""}, {"email", i.Email != ""}, {"street", i.Street != ""}, {"city", i.City != ""},
		{"zip", i.ZIP != ""}, {"device_serial", i.DeviceSerial != ""}} {
		if f.set {
			out = append(out, f.name)
		}
	}
	return out
}

// participantAudit is a participant as an audit event keeps it: the
// withdrawal reason, staff free text, by reference (textRef).
type participantAudit struct {
	Participant
	WithdrawalReason *textRef `json:"withdrawal_reason,omitempty"` // shadows Participant's
}

func auditedParticipant(p Participant) participantAudit {
	return participantAudit{Participant: p, WithdrawalReason: freeText("participants", p.ID, "withdrawal_reason", p.WithdrawalReason)}
}

// UpdateParticipant edits a participant if nobody changed it since in.Version.
// The audit event keeps old and new values of the non-PHI fields and the names
// of the PHI fields that changed.
func (s *Store) UpdateParticipant(ctx context.Context, a cohort.Actor, id int64, in ParticipantInput) (Participant, error) {
	if !a.Role.SeesPHI() {
		return Participant{}, fmt.Errorf("db: update participant: %w", cohort.ErrForbidden)
	}
	in.StudyID = strings.TrimSpace(in.StudyID)
	if err := in.Check(cohort.DateOf(s.now())); err != nil {
		return Participant{}, err
	}
	enrolled, birth := in.EnrolledOn, in.Identity.BirthDate
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		old, err := scanParticipant(tx.QueryRow(ctx, `SELECT `+participantCols+` FROM participants p JOIN sites st ON st.id = p.site_id WHERE p.id = $1 FOR UPDATE OF p`, id))
		if err != nil {
			return err
		}
		if old.Version != in.Version {
			return &cohort.ConflictError{Message: fmt.Sprintf("participant %s was changed by someone else after you opened it; reload to see the current details and make your change again", old.StudyID)}
		}
		var oldID Identity
		var oldBirth *time.Time
		_ = tx.QueryRow(ctx, `SELECT given_name, family_name, birth_date, phone, email, street, city, zip, device_serial FROM participant_identity WHERE participant_id = $1`, id).
			Scan(&oldID.GivenName, &oldID.FamilyName, &oldBirth, &oldID.Phone, &oldID.Email, &oldID.Street, &oldID.City, &oldID.ZIP, &oldID.DeviceSerial)
		_, err = tx.Exec(ctx, `
			UPDATE participants SET study_id = $2, site_id = $3, sex = $4, age_at_enrolment = $5, time_zone = $6, enrolled_on = $7,
			  consent_version = $8, hypertension = $9, diabetes = $10, heart_failure = $11, prior_stroke = $12, vascular_disease = $13,
			  watch_model = $14, rr_capable = $15, version = version + 1, updated_at = now()
			WHERE id = $1`,
			id, in.StudyID, in.SiteID, string(in.Sex), enrolment.AgeAt(birth, enrolled), in.TimeZone, enrolled.String(), in.ConsentVersion,
			in.Risk.Hypertension, in.Risk.Diabetes, in.Risk.HeartFailure, in.Risk.PriorStroke, in.Risk.VascularDisease,
			in.WatchModel, in.RRCapable)
		if err != nil {
			return err
		}
		if err := writeIdentity(ctx, tx, id, in.Identity, birth); err != nil {
			return err
		}
		nw := old
		nw.StudyID, nw.SiteID, nw.Sex, nw.TimeZone, nw.EnrolledOn, nw.ConsentVersion, nw.Risk, nw.WatchModel, nw.RRCapable =
			in.StudyID, in.SiteID, in.Sex, in.TimeZone, enrolled, in.ConsentVersion, in.Risk, in.WatchModel, in.RRCapable
		nw.AgeAtEnrolment = enrolment.AgeAt(birth, enrolled)
		nw.Version = old.Version + 1
		var changedPHI []string
		var ob *cohort.Date
		if oldBirth != nil {
			d := cohort.DateOf(*oldBirth)
			ob = &d
		}
		for _, f := range []struct {
			name string
			a, b string
		}{{"given_name", oldID.GivenName, in.Identity.GivenName}, {"family_name", oldID.FamilyName, in.Identity.FamilyName},
			{"birth_date", fmt.Sprint(dateArg(ob)), fmt.Sprint(dateArg(birth))}, {"phone", oldID.Phone, in.Identity.Phone},
			{"email", oldID.Email, in.Identity.Email}, {"street", oldID.Street, in.Identity.Street}, {"city", oldID.City, in.Identity.City},
			{"zip", oldID.ZIP, in.Identity.ZIP}, {"device_serial", oldID.DeviceSerial, in.Identity.DeviceSerial}} {
			if strings.TrimSpace(f.a) != strings.TrimSpace(f.b) {
				changedPHI = append(changedPHI, f.name)
			}
		}
		return audit(ctx, tx, a, "participant.update", "participant", strconv.FormatInt(id, 10), auditedParticipant(old),
			map[string]any{"participant": auditedParticipant(nw), "phi_fields_changed": changedPHI})
	})
	if err != nil {
		return Participant{}, mapErr("update participant", err)
	}
	return s.Participant(ctx, id)
}

// Withdraw records a withdrawal on the day on. Open cases of the
// participant are closed as withdrawn by the caller's follow-up logic.
func (s *Store) Withdraw(ctx context.Context, a cohort.Actor, id int64, on cohort.Date, reason string, version int) (Participant, error) {
	w := enrolment.Withdrawal{On: on, Reason: strings.TrimSpace(reason)}
	if err := w.Check(cohort.DateOf(s.now())); err != nil {
		return Participant{}, err
	}
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		old, err := scanParticipant(tx.QueryRow(ctx, `SELECT `+participantCols+` FROM participants p JOIN sites st ON st.id = p.site_id WHERE p.id = $1 FOR UPDATE OF p`, id))
		if err != nil {
			return err
		}
		if old.Version != version {
			return &cohort.ConflictError{Message: fmt.Sprintf("participant %s was changed by someone else after you opened it; reload and try again", old.StudyID)}
		}
		if err := w.CheckAgainst(old.EnrolledOn, old.WithdrawnOn); err != nil {
			return err
		}
		if _, err := tx.Exec(ctx, `UPDATE participants SET withdrawn_on = $2, withdrawal_reason = $3, version = version + 1, updated_at = now() WHERE id = $1`,
			id, on.String(), w.Reason); err != nil {
			return err
		}
		return audit(ctx, tx, a, "participant.withdraw", "participant", strconv.FormatInt(id, 10),
			map[string]any{"withdrawn_on": nil}, map[string]any{"withdrawn_on": on.String(), "reason": freeText("participants", id, "withdrawal_reason", w.Reason)})
	})
	if err != nil {
		return Participant{}, mapErr("withdraw", err)
	}
	return s.Participant(ctx, id)
}

package cohort

import "fmt"

// Role is what a staff member may do. Stored as text in the database.
type Role string

// The staff roles of a study.
const (
	Admin        Role = "admin"        // users, sites, protocols, study settings
	Coordinator  Role = "coordinator"  // triage, contact, shipments, referral preparation
	Investigator Role = "investigator" // over-reads, statistics, referral sign-off
	Monitor      Role = "monitor"      // read-only, de-identified oversight
)

// Roles lists every role in display order.
var Roles = []Role{Coordinator, Investigator, Monitor, Admin}

// Label is the role's name on screen.
func (r Role) Label() string {
	switch r {
	case Admin:
		return "Administrator"
	case Coordinator:
		return "Coordinator"
	case Investigator:
		return "Investigator"
	case Monitor:
		return "Monitor (de-identified)"
	}
	return string(r)
}

// Valid reports whether r is a known role.
func (r Role) Valid() bool {
	switch r {
	case Admin, Coordinator, Investigator, Monitor:
		return true
	}
	return false
}

// ParseRole reads a stored or submitted role.
func ParseRole(s string) (Role, error) {
	r := Role(s)
	if !r.Valid() {
		return "", fmt.Errorf("unknown role %q", s)
	}
	return r, nil
}

// SeesPHI is the one rule deciding who may see protected health information
// (names, contact details, exact dates of birth, ZIP codes, device serials).
// Monitors work from de-identified views only.
func (r Role) SeesPHI() bool {
	switch r {
	case Admin, Coordinator, Investigator:
		return true
	}
	return false
}

// SeesDatesAndFreeText is the one rule deciding who sees the calendar dates
// tied to a participant (enrolment, withdrawal, the days of their study
// weeks, reading times, notes, case steps) and the free text staff write
// about participants (notes, withdrawal reasons). Safe Harbor counts every
// element of such a date but the year as an identifier, and free text can
// hold anything. Roles without it (monitors) see study time instead: days
// and weeks counted from the participant's own enrolment day, and the
// enrolment itself as a recruitment week counted from the study's first
// enrolment.
func (r Role) SeesDatesAndFreeText() bool {
	switch r {
	case Admin, Coordinator, Investigator:
		return true
	}
	return false
}

// Actor is who makes a change or views PHI: written into every audit event.
type Actor struct {
	UserID    int64 // 0 for the system itself (imports by command, background jobs)
	Name      string
	Role      Role
	Addr      string // client address
	RequestID string
}

// System is the actor of changes made by the program itself.
var System = Actor{Name: "system"}

// Label is how the actor appears in the audit trail.
func (a Actor) Label() string {
	if a.UserID == 0 {
		if a.Name == "" {
			return "system"
		}
		return a.Name
	}
	return a.Name + " (" + string(a.Role) + ")"
}

package web

import (
	"cohortdesk/cohort"
)

// access says who may use a route: anyone (public), or signed-in users with one
// of the listed roles.
type access struct {
	public bool
	roles  []cohort.Role
	// scrape: no person, only the client addresses allowed to read the
	// metrics (Config.MetricsAllow); everyone else is refused.
	scrape bool
	// setup: open to a session that must first change its password or set up
	// its second factor (the account pages); every other route sends such a
	// session to the step it owes.
	setup bool
}

func allow(roles ...cohort.Role) access { return access{roles: roles} }

// allows reports whether role may use the route.
func (a access) allows(role cohort.Role) bool {
	if a.public {
		return true
	}
	for _, r := range a.roles {
		if r == role {
			return true
		}
	}
	return false
}

// The access levels the route table uses. Read them as sentences: "this route
// is for <level>".
var (
	public     = access{public: true}
	everyone   = allow(cohort.Coordinator, cohort.Investigator, cohort.Monitor, cohort.Admin)
	caseWork   = allow(cohort.Coordinator, cohort.Investigator, cohort.Admin)                 // see and work cases with PHI
	coordWork  = allow(cohort.Coordinator, cohort.Admin)                                      // contact, shipments, imports
	clinical   = allow(cohort.Investigator)                                                   // over-reads, referral sign-off
	analysis   = allow(cohort.Investigator, cohort.Monitor, cohort.Admin, cohort.Coordinator) // statistics and progress
	deidExport = allow(cohort.Investigator, cohort.Admin)                                     // de-identified dataset export
	referrals  = allow(cohort.Coordinator, cohort.Investigator)                               // referral summaries
	exportArea = allow(cohort.Coordinator, cohort.Investigator, cohort.Admin)                 // the exports page: summaries and dataset exports
	adminOnly  = allow(cohort.Admin)
	tuning     = allow(cohort.Investigator, cohort.Admin)   // threshold sweep: investigators weigh, admins set protocols
	account    = access{roles: everyone.roles, setup: true} // one's own account: password, second factor
	scrapers   = access{scrape: true}                       // the metrics: allowed monitoring addresses only, no role
)

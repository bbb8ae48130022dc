package web

import (
	"net/http"

	"cohortdesk/assets"

	"github.com/go-chi/chi/v5"
)

// route is one entry of the route table.
type route struct {
	method  string
	pattern string
	access  access
	h       appHandler
}

// routes is the index of the application: every page and action, in one list.
func (s *Server) routes() []route {
	return []route{
		{"GET", "/health", public, s.health},
		{"GET", "/ready", public, s.ready},
		{"GET", "/metrics", scrapers, s.metricsPage},
		{"GET", "/signin", public, s.signInForm},
		{"POST", "/signin", public, s.signIn},
		{"POST", "/signout", public, s.signOut},
		{"GET", "/signin/code", public, s.signInCodeForm},
		{"POST", "/signin/code", public, s.signInCode},
		{"GET", "/account", account, s.accountHome},
		{"GET", "/account/password", account, s.passwordForm},
		{"POST", "/account/password", account, s.passwordChange},
		{"GET", "/account/second-factor", account, s.secondFactorForm},
		{"POST", "/account/second-factor", account, s.secondFactorSetUp},

		{"GET", "/", everyone, s.home},

		{"GET", "/participants", everyone, s.participantsList},
		{"GET", "/participants.csv", everyone, s.participantsCSV},
		{"GET", "/participants/new", coordWork, s.participantNew},
		{"POST", "/participants", coordWork, s.participantCreate},
		{"GET", "/participants/{id}", everyone, s.participantShow},
		{"GET", "/participants/{id}/edit", coordWork, s.participantEdit},
		{"POST", "/participants/{id}/edit", coordWork, s.participantUpdate},
		{"GET", "/participants/{id}/withdraw", coordWork, s.participantWithdrawForm},
		{"POST", "/participants/{id}/withdraw", coordWork, s.participantWithdraw},
		{"POST", "/participants/{id}/notes", caseWork, s.participantNote},

		{"GET", "/progress", analysis, s.progress},
		{"GET", "/progress/cascade/{box}", analysis, s.cascadeBox},
		{"GET", "/progress/report", analysis, s.progressReport},
		{"GET", "/progress/report.zip", analysis, s.progressReportZip},

		{"GET", "/imports", coordWork, s.importsList},
		{"GET", "/imports/new", coordWork, s.importNew},
		{"POST", "/imports", coordWork, s.importCreate},
		{"GET", "/imports/{id}", coordWork, s.importShow},
		{"GET", "/imports/{id}/rejects.csv", coordWork, s.importRejects},

		{"GET", "/triage", caseWork, s.triage},
		{"GET", "/cases", everyone, s.casesList}, // de-identified for monitors
		{"POST", "/cases/bulk/assign", caseWork, s.casesBulkAssign},
		{"POST", "/cases/bulk/letter", coordWork, s.casesBulkLetter},
		{"GET", "/cases/{id}", caseWork, s.caseShow},
		{"GET", "/cases/{id}/contact", caseWork, s.caseContact},
		{"POST", "/cases/{id}/assign", caseWork, s.caseAssign},
		{"POST", "/cases/{id}/attempts", coordWork, s.caseAttempt},
		{"POST", "/cases/{id}/move", caseWork, s.caseMove},
		{"POST", "/cases/{id}/close", caseWork, s.caseClose},
		{"POST", "/cases/{id}/shipment", coordWork, s.caseShipment},
		{"POST", "/cases/{id}/return", coordWork, s.caseReturn},
		{"POST", "/cases/{id}/note", caseWork, s.caseNote},
		{"POST", "/cases/{id}/messages", coordWork, s.caseMessage},
		{"POST", "/cases/bulk/messages", coordWork, s.casesBulkMessage},
		{"POST", "/cases/bulk/letters", coordWork, s.casesBulkLetters},
		{"GET", "/letters/{id}", coordWork, s.letterBatchShow},
		{"GET", "/letters/{id}/pdf", coordWork, s.letterBatchPDF},
		{"POST", "/letters/{id}/posted", coordWork, s.letterBatchPosted},
		{"GET", "/messages/{id}", caseWork, s.messageShow},
		{"GET", "/outbox", coordWork, s.outbox},
		{"POST", "/participants/{id}/contact-preferences", coordWork, s.contactPreferencesSave},
		{"POST", "/account/morning-summary", caseWork, s.morningSummary},
		{"POST", "/outreach/receipts", public, s.deliveryReceipt}, // the text gateway, with its token
		{"GET", "/screening", caseWork, s.screeningJobs},
		{"GET", "/screening/external", coordWork, s.externalVerdictsForm},
		{"POST", "/screening/external", coordWork, s.externalVerdictsImport},
		{"GET", "/sweep", tuning, s.sweep},
		{"POST", "/sweep", tuning, s.sweepStart},
		{"POST", "/cases/{id}/recordings", coordWork, s.caseRecordingAdd},

		{"GET", "/recordings/{id}", caseWork, s.recordingShow},
		{"POST", "/recordings/{id}/over-reads", clinical, s.recordingOverRead},
		{"POST", "/recordings/{id}/lead", caseWork, s.recordingLead},
		{"POST", "/recordings/{id}/over-reads/revise", clinical, s.recordingRevise},
		{"POST", "/recordings/{id}/not-needed", clinical, s.recordingNotNeeded},
		{"GET", "/confirmations", analysis, s.confirmations}, // counts only for monitors
		{"GET", "/confirmations/statistics", analysis, s.confirmationStats},
		{"GET", "/confirmations/statistics.csv", analysis, s.confirmationStatsCSV},

		{"GET", "/participants/{id}/referral", referrals, s.referralPreview},
		{"POST", "/participants/{id}/referral", referrals, s.referralIssue},
		{"GET", "/referrals/new", referrals, s.referralFind},
		{"GET", "/referrals/{id}", referrals, s.referralShow},
		{"GET", "/referrals/{id}/pdf", referrals, s.referralPDFFile},
		{"POST", "/referrals/{id}/signoff", clinical, s.referralSignOff},
		{"GET", "/exports", exportArea, s.exportsPage},
		{"POST", "/exports/referrals", referrals, s.referralBatch},
		{"POST", "/exports/dataset", deidExport, s.datasetExport},

		{"GET", "/admin", adminOnly, s.adminHome},
		{"GET", "/admin/users", adminOnly, s.usersList},
		{"POST", "/admin/users", adminOnly, s.userCreate},
		{"GET", "/admin/users/{id}", adminOnly, s.userEdit},
		{"POST", "/admin/users/{id}", adminOnly, s.userUpdate},
		{"POST", "/admin/users/{id}/password", adminOnly, s.userResetPassword},
		{"POST", "/admin/users/{id}/second-factor/reset", adminOnly, s.secondFactorReset},
		{"GET", "/admin/security", adminOnly, s.securityPage},
		{"POST", "/admin/security", adminOnly, s.securitySave},
		{"GET", "/admin/audit", adminOnly, s.auditList},
		{"GET", "/admin/audit.csv", adminOnly, s.auditCSV},
		{"GET", "/admin/study", adminOnly, s.studySettings},
		{"POST", "/admin/study", adminOnly, s.studySettingsSave},
		{"GET", "/admin/protocols", adminOnly, s.protocolsList},
		{"POST", "/admin/protocols", adminOnly, s.protocolCreate},
		{"GET", "/admin/protocols/{id}", adminOnly, s.protocolShow},
		{"GET", "/admin/protocols/{id}/new", adminOnly, s.protocolNew},
		{"POST", "/admin/protocols/{id}/activate", adminOnly, s.protocolActivate},
		{"GET", "/admin/templates", adminOnly, s.templatesList},
		{"POST", "/admin/templates", adminOnly, s.templateSave},
		{"POST", "/admin/templates/words", adminOnly, s.templateWords},
		{"GET", "/admin/templates/{id}", adminOnly, s.templateShow},
	}
}

func (s *Server) buildRouter() chi.Router {
	s.routeTable = s.routes()
	r := chi.NewRouter()
	r.Use(s.metrics.route)
	for _, rt := range s.routeTable {
		h := rt.h
		if rt.method == "GET" && !rt.access.public {
			// Pages people read may come from the standby; health,
			// readiness and sign-in answer for the primary.
			h = s.fromStandby(rt.pattern, h)
		}
		g := s.guard(rt.access, s.wrap(h))
		r.Method(rt.method, rt.pattern, g)
		if rt.method == "GET" {
			// HEAD answers as GET does, with the same status and headers; the
			// server drops the body (net/http writes none for HEAD).
			r.Method("HEAD", rt.pattern, g)
		}
	}
	r.Handle(assets.Prefix+"*", assets.Handler())
	// Unknown addresses: visitors go to sign-in like everywhere else, staff get 404.
	r.NotFound(s.guard(everyone, s.wrap(func(w http.ResponseWriter, r *http.Request) error { return errNotFound })).ServeHTTP)
	r.MethodNotAllowed(func(w http.ResponseWriter, r *http.Request) {
		http.Error(w, "method not allowed", http.StatusMethodNotAllowed)
	})
	return r
}

// accessOf finds the access level of a route in the table. HEAD is GET's.
func (s *Server) accessOf(method, pattern string) (access, bool) {
	if method == "HEAD" {
		method = "GET"
	}
	for _, rt := range s.routeTable {
		if rt.method == method && rt.pattern == pattern {
			return rt.access, true
		}
	}
	return access{}, false
}

// may reports whether the signed-in role may open (GET) the route with this
// pattern, so a page offers only links that lead somewhere.
func (s *Server) may(r *http.Request, pattern string) bool {
	u, ok := userFrom(r.Context())
	if !ok {
		return false
	}
	acc, ok := s.accessOf("GET", pattern)
	return ok && acc.allows(u.Role)
}

// urlParam reads a path parameter.

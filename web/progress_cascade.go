package web

import (
	"context"
	"fmt"
	"math"
	"net/http"
	"net/url"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/db"
	"cohortdesk/views"

	"github.com/a-h/templ"
)

// cascadeQuery is the cascade's choice as read from a request: the filter
// for the store and the values as given, for forms and links.
type cascadeQuery struct {
	filter   cascade.Filter
	from, to cohort.Date // enrolment days, both included; zero is open
	protocol string
	site     string
	siteCode string
}

// parseCascadeQuery reads protocol, site, from and to. Malformed values and
// sites that do not exist are refused (a queryError, 400); a protocol version
// that does not exist is left for the store to refuse (404).
func parseCascadeQuery(v url.Values, sites []db.Site) (cascadeQuery, error) {
	q := readQuery(v)
	cq := cascadeQuery{}
	readCascadeQuery(q, sites, &cq)
	return cq, q.err()
}

// readCascadeQuery reads the cascade's choices into cq, recording refusals
// in q, for pages that read more parameters besides.
func readCascadeQuery(q *query, sites []db.Site, cq *cascadeQuery) {
	if id := protocolParam(q); id > 0 {
		cq.filter.ProtocolID, cq.protocol = id, strconv.Itoa(id)
	}
	if id := siteParam(q, "site", sites); id > 0 {
		cq.filter.SiteID, cq.site = id, strconv.Itoa(id)
		for _, st := range sites {
			if st.ID == id {
				cq.siteCode = st.Code
			}
		}
	}
	cq.from, cq.to = q.date("from"), q.date("to")
	if err := cq.filter.EnrolledBetween(cq.from, cq.to); err != nil {
		q.refuse("to", err.Error())
	}
}

// protocolParam reads a protocol version's number, 0 when none is chosen;
// whether the version exists is the store's answer (404).
func protocolParam(q *query) int {
	id := q.id("protocol", "protocol version")
	if id > math.MaxInt32 {
		q.refuse("protocol", "choose a protocol version from the list")
		return 0
	}
	return int(id)
}

// values are the query's choices for links, without empty ones.
func (cq cascadeQuery) values() url.Values {
	v := url.Values{}
	if cq.protocol != "" {
		v.Set("protocol", cq.protocol)
	}
	if cq.site != "" {
		v.Set("site", cq.site)
	}
	if !cq.from.IsZero() {
		v.Set("from", cq.from.String())
	}
	if !cq.to.IsZero() {
		v.Set("to", cq.to.String())
	}
	return v
}

func dateText(d cohort.Date) string {
	if d.IsZero() {
		return ""
	}
	return d.String()
}

// period says in words whose figures are shown.
func (cq cascadeQuery) period() string {
	var out string
	switch {
	case cq.from.IsZero() && cq.to.IsZero():
		out = "all participants enrolled so far"
	case cq.to.IsZero():
		out = "participants enrolled from " + cq.from.Label()
	case cq.from.IsZero():
		out = "participants enrolled up to and including " + cq.to.Label()
	default:
		out = "participants enrolled from " + cq.from.Label() + " to " + cq.to.Label() + " (both days included)"
	}
	if cq.siteCode != "" {
		out += " at site " + cq.siteCode
	}
	return out
}

// href is an address with the query's choices and extra values.
func (cq cascadeQuery) href(path string, extra ...string) string {
	v := cq.values()
	for i := 0; i+1 < len(extra); i += 2 {
		v.Set(extra[i], extra[i+1])
	}
	if len(v) == 0 {
		return path
	}
	return path + "?" + v.Encode()
}

// flowView turns the store's cascade into the diagram's view model; every
// number on it is the store's.
func flowView(c cascade.Cascade, cq cascadeQuery) views.FlowView {
	f := views.FlowView{Protocol: c.Protocol.Label(), Period: cq.period()}
	for i, b := range c.Boxes {
		path := "/progress/cascade/" + b.Key
		v := views.FlowBoxView{Key: b.Key, Label: b.Label, Definition: b.Definition, Count: b.Count(), Cases: b.CaseN,
			ShowCases: i >= 2, Href: cq.href(path)}
		if i > 0 && c.Boxes[i-1].Count() > 0 {
			v.Share = pct(float64(b.Count()) / float64(c.Boxes[i-1].Count()))
		}
		for _, e := range b.Exits {
			ev := views.FlowExitView{Key: string(e.Reason), Label: e.Reason.Label(), Count: e.N,
				InProgress: e.Reason.InProgress(), Href: cq.href(path, "exit", string(e.Reason))}
			if ev.InProgress {
				v.Waiting, v.WaitingN = append(v.Waiting, ev), v.WaitingN+ev.Count
			} else {
				v.Left, v.LeftN = append(v.Left, ev), v.LeftN+ev.Count
			}
		}
		f.Boxes = append(f.Boxes, v)
	}
	return f
}

// protocolOptions lists the versions to choose from, the active one marked.
func protocolOptions(versions []cascade.ProtocolRef) []views.Option {
	var out []views.Option
	for _, v := range versions {
		label := v.Label()
		if v.Active {
			label += " (active)"
		}
		out = append(out, views.Option{Value: strconv.Itoa(v.ID), Label: label})
	}
	return out
}

// progressCascade builds the cascade section of the progress page from the
// request's protocol, site and enrolment period.
func (s *Server) progressCascade(ctx context.Context, q url.Values, window int) (templ.Component, error) {
	sites, err := s.store.Sites(ctx)
	if err != nil {
		return nil, err
	}
	cq, err := parseCascadeQuery(q, sites)
	if err != nil {
		return nil, err
	}
	c, err := s.store.Cascade(ctx, cq.filter)
	if err != nil {
		return nil, err
	}
	m := views.CascadeSectionModel{Flow: flowView(c, cq), Protocols: protocolOptions(c.Versions), ProtoID: strconv.Itoa(c.Protocol.ID),
		SiteID: cq.site, From: dateText(cq.from), To: dateText(cq.to), Window: window,
		ReportHref: cq.href("/progress/report", "window", strconv.Itoa(window))}
	for _, st := range sites {
		m.Sites = append(m.Sites, views.Option{Value: strconv.Itoa(st.ID), Label: st.Code + " · " + st.Name})
	}
	return views.CascadeSection(m), nil
}

// cascadePageSize is how many participants a box's list shows at once.
const cascadePageSize = 200

// cascadeBox lists the participants of one box of the cascade (or of one
// reason for leaving it) with their site and cases. Monitors see study IDs,
// sites and states only: no dates and no links to case pages
// (cohort.Role.SeesPHI decides); nobody sees names here.
func (s *Server) cascadeBox(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	q := r.URL.Query()
	sites, err := s.store.Sites(ctx)
	if err != nil {
		return err
	}
	qr := readQuery(q)
	var cq cascadeQuery
	readCascadeQuery(qr, sites, &cq)
	exit := cascade.ExitReason(qr.get("exit"))
	if exit != "" && !exit.Known() {
		qr.refuse("exit", "choose a reason shown on the cascade")
	}
	// Pages follow each other by key: after is the last participant id of
	// the previous page and shown how many rows came before, for numbering.
	after := qr.id("after", "a participant id from the previous page")
	shown, _ := qr.number("shown", 0, math.MaxInt32, "rows shown before")
	if err := qr.err(); err != nil {
		return err
	}
	c, err := s.store.Cascade(ctx, cq.filter)
	if err != nil {
		return err
	}
	at := -1
	for i, b := range c.Boxes {
		if b.Key == urlParam(r, "box") {
			at = i
		}
	}
	if at < 0 {
		return errNotFound
	}
	box := c.Boxes[at]
	flow := flowView(c, cq)
	listed, label := box.Count(), ""
	if exit != "" {
		listed, label = 0, exit.Label()
		for _, e := range box.Exits {
			if e.Reason == exit {
				listed = e.N
			}
		}
	}
	// Study IDs listed for an enrolment period would tell a role that sees no
	// dates when each of them enrolled (narrow the period to a day and look);
	// such a role sees the counts of a period, and the lists of the whole
	// study.
	unlisted := ""
	page := db.BoxPage{}
	if !disclosureOf(r).dates && (!cq.from.IsZero() || !cq.to.IsZero()) {
		unlisted = "Participants are not listed by study ID for an enrolment period to your role: with the period, the list would show when each of them enrolled. Remove the period to see the list."
	} else {
		page, err = s.store.CascadeMembersAfter(ctx, c.Filter, at, exit, after, cascadePageSize)
	}
	if err != nil {
		return err
	}
	if after > 0 && len(page.Members) == 0 {
		return errNotFound
	}
	members := page.Members
	start, end := shown, shown+len(members)
	deid := !role(r).SeesPHI()
	openCases := caseWork.allows(role(r))
	loc := time.UTC
	if !deid {
		st, err := s.store.StudySettings(ctx)
		if err != nil {
			return err
		}
		loc = st.Location()
	}
	next := ""
	if at+1 < len(c.Boxes) {
		next = "on to " + c.Boxes[at+1].Label
	}
	path := "/progress/cascade/" + box.Key
	m := views.CascadeBoxModel{Page: s.page(r, "Cascade: "+box.Label, "progress"), Protocol: c.Protocol.Label(), Period: cq.period(),
		Box: flow.Boxes[at], Exit: label, Listed: listed, DeIdentified: deid, From: start + 1, Upto: end,
		Back: cq.href("/progress") + "#cascade", BoxHref: cq.href(path), Unlisted: unlisted}
	extra := []string{}
	if exit != "" {
		extra = []string{"exit", string(exit)}
	}
	if after > 0 {
		m.Prev = cq.href(path, extra...) // back to the first page
	}
	if page.Next != 0 {
		m.Next = cq.href(path, append(extra, "after", strconv.FormatInt(page.Next, 10), "shown", strconv.Itoa(end))...)
	}
	for _, p := range members {
		row := views.CascadeMemberRow{Href: fmt.Sprintf("/participants/%d", p.ID), StudyID: p.StudyID, Site: p.SiteCode, Withdrawn: p.Withdrawn, Step: next}
		if !deid {
			row.Enrolled = p.EnrolledOn.Label()
		}
		if p.Standing.Box == at && p.Standing.Exit != "" {
			row.Step, row.InProgress = p.Standing.Exit.Label(), p.Standing.Exit.InProgress()
		}
		for _, k := range p.Cases {
			cv := views.MemberCaseView{State: k.State.Label(), Weeks: weeksText(k.FirstWeek, k.LastWeek)}
			if openCases {
				cv.Href = fmt.Sprintf("/cases/%d", k.ID)
			}
			if !deid {
				cv.Flagged = dayOf(k.FlaggedAt, loc)
			}
			row.Cases = append(row.Cases, cv)
		}
		m.Rows = append(m.Rows, row)
	}
	return s.ok(w, r, views.CascadeBox(m))
}

// weeksText names a case's study weeks.
func weeksText(first, last int) string {
	if first == last {
		return "week " + strconv.Itoa(first)
	}
	return "weeks " + strconv.Itoa(first) + "–" + strconv.Itoa(last)
}

package web

import (
	"errors"
	"math"
	"net/http"
	"net/url"
	"testing"
	"time"
	"unicode/utf8"

	"cohortdesk/cohort/enrolment"
	"cohortdesk/db"
)

// The query parsers take any query string a person can type. Each fuzz
// target feeds one raw query string through a page's parser and checks that
// it either refuses it with a queryError (400) or returns values the page and
// the store can use: never a panic, never another kind of error. Seeds are
// the addresses the pages make and the tampered ones of
// TestTamperedQueryIsBadRequest (also under testdata/fuzz).

var fuzzSites = []db.Site{{ID: 1, Code: "AA"}, {ID: 3, Code: "CC"}}

var querySeeds = []string{
	"", "q=QRW&site=1&status=active&positive=4&open_case=on&sort=enrolled&desc=on",
	"positive=99999999999999999999", "positive=-1", "site=abc", "site=2", "status=gone", "sort=name",
	"after=%25%25%25", "after=bm90IGpzb24", "sort=enrolled&after=eyJrIjoibm90IGEgZGF0ZSIsImkiOjF9",
	"after=eyJrIjoiQVx1MDAwMEIiLCJpIjoxfQ", "q=%00", "state=lost", "owner=me", "owner=7", "owner=none",
	"window=1", "window=12", "protocol=2147483648", "from=2026-13-01&to=2026-01-01", "from=2026-01-01&to=2026-02-01",
	"before=5&actor=2&action=case.&object=case&object_id=12", "table=km", "table=all", "a=1;b=2",
}

// rawQuery parses a fuzzed query string as a request would carry it: a
// string the request check refuses is a queryError too.
func rawQuery(t *testing.T, raw string) (url.Values, error) {
	t.Helper()
	r := &http.Request{URL: &url.URL{RawQuery: raw}}
	if err := checkRawQuery(r); err != nil {
		return nil, err
	}
	return r.URL.Query(), nil
}

// refusedRight fails unless err is nil or a queryError with messages.
func refusedRight(t *testing.T, raw string, err error) bool {
	t.Helper()
	if err == nil {
		return false
	}
	var qe *queryError
	if !errors.As(err, &qe) || len(qe.fields) == 0 || statusOf(err) != http.StatusBadRequest {
		t.Fatalf("%q: refused with %T %v, want a 400 queryError", raw, err, err)
	}
	return true
}

func seed(f *testing.F) {
	for _, s := range querySeeds {
		f.Add(s)
	}
}

func FuzzParticipantQuery(f *testing.F) {
	seed(f)
	f.Fuzz(func(t *testing.T, raw string) {
		v, err := rawQuery(t, raw)
		if refusedRight(t, raw, err) {
			return
		}
		pf, form, err := participantFilter(v, true, fuzzSites)
		if refusedRight(t, raw, err) {
			return
		}
		if pf.SiteID != 0 && pf.SiteID != 1 && pf.SiteID != 3 {
			t.Fatalf("%q: site %d is not the study's", raw, pf.SiteID)
		}
		if pf.PositiveWeeks < 0 || pf.PositiveWeeks > db.MaxPositiveWeeks {
			t.Fatalf("%q: positive weeks %d", raw, pf.PositiveWeeks)
		}
		if err := pf.Check(); err != nil {
			t.Fatalf("%q: accepted a filter the store refuses: %v", raw, err)
		}
		if !utf8.ValidString(form.Search) || len([]rune(form.Search)) > maxQueryText {
			t.Fatalf("%q: search %q accepted", raw, form.Search)
		}
	})
}

func FuzzCaseQuery(f *testing.F) {
	seed(f)
	workers := []db.User{{ID: 7}, {ID: 9}}
	f.Fuzz(func(t *testing.T, raw string) {
		v, err := rawQuery(t, raw)
		if refusedRight(t, raw, err) {
			return
		}
		for _, ws := range [][]db.User{workers, nil} {
			cf, _, err := caseFilter(v, 7, fuzzSites, ws)
			if refusedRight(t, raw, err) {
				continue
			}
			if cf.OwnerID != 0 && cf.OwnerID != 7 && cf.OwnerID != 9 {
				t.Fatalf("%q: owner %d is nobody the list offers", raw, cf.OwnerID)
			}
			if ws == nil && (cf.OwnerID != 0 || cf.Unowned) {
				t.Fatalf("%q: an owner filter for a role without one", raw)
			}
			if err := cf.Check(); err != nil {
				t.Fatalf("%q: accepted a filter the store refuses: %v", raw, err)
			}
		}
	})
}

func FuzzCascadeQuery(f *testing.F) {
	seed(f)
	f.Fuzz(func(t *testing.T, raw string) {
		v, err := rawQuery(t, raw)
		if refusedRight(t, raw, err) {
			return
		}
		cq, err := parseCascadeQuery(v, fuzzSites)
		if refusedRight(t, raw, err) {
			return
		}
		if cq.filter.ProtocolID < 0 || cq.filter.ProtocolID > math.MaxInt32 {
			t.Fatalf("%q: protocol %d", raw, cq.filter.ProtocolID)
		}
		for _, d := range []struct{ y int }{{cq.from.Year}, {cq.to.Year}} {
			if d.y != 0 && (d.y < 1900 || d.y > 9998) {
				t.Fatalf("%q: year %d accepted", raw, d.y)
			}
		}
		if !cq.from.IsZero() && !cq.to.IsZero() && cq.to.Before(cq.from) {
			t.Fatalf("%q: period ends before it starts", raw)
		}
		q := readQuery(v)
		if w := windowOf(q); q.err() == nil && (w < 2 || w > enrolment.TrailingWeeks) {
			t.Fatalf("%q: window %d", raw, w)
		}
	})
}

func FuzzStatsQuery(f *testing.F) {
	seed(f)
	f.Fuzz(func(t *testing.T, raw string) {
		v, err := rawQuery(t, raw)
		if refusedRight(t, raw, err) {
			return
		}
		sf, table, err := statsFilter(v, fuzzSites, "versions", "groups", "km", "kappa")
		if refusedRight(t, raw, err) {
			return
		}
		if sf.ProtocolID < 0 || (sf.SiteID != 0 && sf.SiteID != 1 && sf.SiteID != 3) {
			t.Fatalf("%q: filter %+v", raw, sf)
		}
		switch table {
		case "", "versions", "groups", "km", "kappa":
		default:
			t.Fatalf("%q: table %q", raw, table)
		}
	})
}

func FuzzAuditQuery(f *testing.F) {
	seed(f)
	f.Fuzz(func(t *testing.T, raw string) {
		v, err := rawQuery(t, raw)
		if refusedRight(t, raw, err) {
			return
		}
		af, _, err := auditFilter(v, time.UTC)
		if refusedRight(t, raw, err) {
			return
		}
		if af.ActorID < 0 || af.BeforeID < 0 {
			t.Fatalf("%q: filter %+v", raw, af)
		}
		for _, s := range []string{af.Action, af.ObjectType, af.ObjectID, af.StudyID, af.Who} {
			if !utf8.ValidString(s) || len([]rune(s)) > maxQueryText {
				t.Fatalf("%q: text %q accepted", raw, s)
			}
		}
	})
}

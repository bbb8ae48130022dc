package web

import (
	"net/http"

	"cohortdesk/cohort"
	"cohortdesk/views/components"

	"github.com/go-chi/chi/v5"
)

// The key scheme of cohortdesk, defined here once. It is built for the work
// of a study office rather than borrowed: a number for each area, printed on
// its tab; on a page with a list, l goes to the list and the arrow keys move
// between its rows, Enter opens the row; the letters are the steps of
// following up a flag (take it, who gets it, contact attempt, recorder
// mailed, read the ECG), and f and + are the page's search and its "new". A
// key works only where its element is on the page (data-key, or
// data-row-key inside the focused row; assets/js/keys.js), and a page prints
// only the keys its reader may use.
//
// The areas' numbers are in areas (server.go), fixed per area, so a number
// opens the same area for every role.

// keyDef is one key: the key caps to print and what the key does.
type keyDef struct {
	caps []string
	does string
}

// The keys.
var (
	keyList    = keyDef{[]string{"l"}, "to the list"}
	keyRows    = keyDef{[]string{"↓", "↑"}, "next or previous row"}
	keyOpen    = keyDef{[]string{"Enter"}, "open the row"}
	keyFind    = keyDef{[]string{"f"}, "to the search"}
	keyNew     = keyDef{[]string{"+"}, "new"}
	keyTake    = keyDef{[]string{"t"}, "take the case"}
	keyWho     = keyDef{[]string{"w"}, "choose who works it"}
	keyContact = keyDef{[]string{"c"}, "log a contact attempt"}
	keyMailed  = keyDef{[]string{"m"}, "record the recorder mailed"}
	keyTick    = keyDef{[]string{"x"}, "tick the row for a bulk step"}
	keyRead    = keyDef{[]string{"r"}, "read the ECG: choose the rhythm"}
	keyLeave   = keyDef{[]string{"Esc"}, "leave a field"}
)

// keyUse is a key on a page; when method and pattern are set, only roles the
// route table lets take that route see it (and find its element).
type keyUse struct {
	key             keyDef
	method, pattern string
}

// listKeys are the keys of every page with a list of rows.
var listKeys = []keyUse{{key: keyList}, {key: keyRows}, {key: keyOpen}}

// pageKeys are the keys each page offers, by route pattern, in the order
// the page prints them.
var pageKeys = map[string][]keyUse{
	"/triage": append(listKeys[:len(listKeys):len(listKeys)],
		keyUse{keyTake, "POST", "/cases/{id}/assign"}, keyUse{keyWho, "POST", "/cases/{id}/assign"},
		keyUse{keyContact, "POST", "/cases/{id}/attempts"}, keyUse{keyMailed, "POST", "/cases/{id}/shipment"},
		keyUse{key: keyLeave}),
	"/participants":      append([]keyUse{{key: keyFind}, {keyNew, "GET", "/participants/new"}}, listKeys...),
	"/participants/{id}": listKeys,
	"/cases": append([]keyUse{{key: keyFind}}, append(listKeys[:len(listKeys):len(listKeys)],
		keyUse{keyTick, "POST", "/cases/bulk/assign"})...),
	"/cases/{id}": append(listKeys[:len(listKeys):len(listKeys)],
		keyUse{keyWho, "POST", "/cases/{id}/assign"}, keyUse{keyContact, "POST", "/cases/{id}/attempts"},
		keyUse{keyMailed, "POST", "/cases/{id}/shipment"}, keyUse{key: keyLeave}),
	"/recordings/{id}":        {{keyRead, "POST", "/recordings/{id}/over-reads"}, {keyLeave, "POST", "/recordings/{id}/over-reads"}},
	"/confirmations":          listKeys,
	"/screening":              listKeys,
	"/imports":                append([]keyUse{{keyNew, "GET", "/imports/new"}}, listKeys...),
	"/progress":               listKeys,
	"/progress/cascade/{box}": listKeys,
	"/sweep":                  listKeys,
	"/admin/protocols":        listKeys,
	"/admin/protocols/{id}":   {{keyNew, "GET", "/admin/protocols/{id}/new"}},
}

// keyHints are the keys the page being served offers the signed-in role.
func (s *Server) keyHints(r *http.Request, role cohort.Role) []components.KeyHint {
	rc := chi.RouteContext(r.Context())
	if rc == nil {
		return nil
	}
	var out []components.KeyHint
	for _, u := range pageKeys[rc.RoutePattern()] {
		if u.pattern != "" {
			if acc, ok := s.accessOf(u.method, u.pattern); !ok || !acc.allows(role) {
				continue
			}
		}
		out = append(out, components.KeyHint{Caps: u.key.caps, Does: u.key.does})
	}
	return out
}

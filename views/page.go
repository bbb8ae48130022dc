// Package views holds the templ components that render cohortdesk's pages. Each
// page takes one view model built by its handler; views never query anything.
package views

import (
	"strconv"

	"cohortdesk/views/components"
)

// Page is what the layout needs on every page.
type Page struct {
	Title   string               // the page's own title, before the app name
	Area    string               // key of the navigation area the page belongs to
	Study   string               // study name shown in the header
	User    *User                // nil when signed out
	Nav     []NavItem            // areas this user may open, in order
	Flash   string               // one-off notice after a redirect
	Scripts []string             // extra script URLs, e.g. the chart library
	Keys    []components.KeyHint // the page's keys for this reader (web/keys.go)
	Assets  AssetURLs            // cache-busted URLs of the shared assets
}

// User is the signed-in person as the layout shows them.
type User struct {
	Name      string
	RoleLabel string
}

// NavItem is one navigation area.
type NavItem struct {
	Key   string
	Label string
	Href  string
	Key1  string // the area's number key, printed on its tab (web/keys.go)
}

// AssetURLs are the hashed URLs of files every page loads.
type AssetURLs struct {
	CSS  string
	JS   string
	HTMX string
	// PartCSS and PartJS are further stylesheets and scripts every page
	// loads, one concern a file (cautions, keys, chart colours).
	PartCSS []string
	PartJS  []string
}

// atLeast writes a count that may have stopped counting (a list counts up to
// a cap rather than every row of a large study): "more than N" then.
func atLeast(n int64, stopped bool) string {
	s := strconv.FormatInt(n, 10)
	if stopped {
		return "more than " + s
	}
	return s
}

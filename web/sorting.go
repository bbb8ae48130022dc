package web

import (
	"net/url"

	"cohortdesk/views/components"
)

// sortHead builds the header of a sortable column of the list at path, with
// the list's query q (its filter): following it shows the list in the
// column's order from the first page, ascending, or descending when the
// list is already ascending by it. current is the list's sort key ("" is
// def) and desc its direction.
func sortHead(path string, q url.Values, label, key, current, def string, desc bool) components.SortHead {
	if current == "" {
		current = def
	}
	v := url.Values{}
	for k, vs := range q {
		if k != "after" && k != "done" && k != "sort" && k != "desc" {
			v[k] = vs
		}
	}
	h := components.SortHead{Label: label, Key: key}
	v.Set("sort", key)
	if current == key {
		h.Dir = "ascending"
		if desc {
			h.Dir = "descending"
		} else {
			v.Set("desc", "on")
		}
	}
	h.Href = path + "?" + v.Encode()
	return h
}

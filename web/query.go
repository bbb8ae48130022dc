package web

import (
	"errors"
	"fmt"
	"net/http"
	"net/url"
	"slices"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"cohortdesk/cohort"
)

// Query parameters are read strictly: a value a page cannot use (a tampered
// address, a link from an older version, a hand-edited filter) is refused
// with 400 and a message naming the parameter and what it takes, never
// ignored, never a server error. Every page's parameters go through query.

// maxQueryText bounds free-text parameters (a search, an audit filter).
const maxQueryText = 200

// queryError is a request whose query string holds values the page cannot
// use: 400, with a message per parameter.
type queryError struct {
	fields map[string]string
}

// Error words every refused parameter.
func (e *queryError) Error() string {
	return "this address holds values the page cannot use (" + e.list() + ")"
}

// list words every refused parameter in a stable order: "name: message; ...".
func (e *queryError) list() string {
	keys := make([]string, 0, len(e.fields))
	for k := range e.fields {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = k + ": " + e.fields[k]
	}
	return strings.Join(parts, "; ")
}

// query reads the parameters of one request. Each reader returns the zero
// value for a missing parameter and records a refusal for a malformed one;
// err returns them all at once.
type query struct {
	v    url.Values
	errs cohort.ValidationError
}

func readQuery(v url.Values) *query { return &query{v: v} }

// get is the trimmed value of a parameter ("" when missing).
func (q *query) get(name string) string { return strings.TrimSpace(q.v.Get(name)) }

// refuse records a problem with a parameter.
func (q *query) refuse(name, msg string) { q.errs.Add(name, msg) }

// text reads free text of at most maxQueryText characters, without control
// characters (which no search box sends and PostgreSQL may refuse).
func (q *query) text(name string) string {
	v := q.get(name)
	if !utf8.ValidString(v) || strings.ContainsFunc(v, unicode.IsControl) {
		q.refuse(name, "not readable text")
		return ""
	}
	if utf8.RuneCountInString(v) > maxQueryText {
		q.refuse(name, fmt.Sprintf("use at most %d characters", maxQueryText))
		return ""
	}
	return v
}

// oneOf reads a choice: "" or one of allowed.
func (q *query) oneOf(name string, allowed ...string) string {
	v := q.get(name)
	if v == "" || slices.Contains(allowed, v) {
		return v
	}
	q.refuse(name, "choose one of "+strings.Join(allowed, ", "))
	return ""
}

// flag reads a check box: missing, or "on" as browsers send it.
func (q *query) flag(name string) bool {
	return q.oneOf(name, "on") == "on"
}

// number reads a whole number from lo to hi; ok is false when the
// parameter is missing or refused.
func (q *query) number(name string, lo, hi int, what string) (n int, ok bool) {
	v := q.get(name)
	if v == "" {
		return 0, false
	}
	n, err := strconv.Atoi(v)
	if err != nil || n < lo || n > hi {
		q.refuse(name, fmt.Sprintf("%s: a whole number from %d to %d", what, lo, hi))
		return 0, false
	}
	return n, true
}

// id reads a record number: a positive whole number, 0 when missing.
func (q *query) id(name, what string) int64 {
	v := q.get(name)
	if v == "" {
		return 0
	}
	n, err := strconv.ParseInt(v, 10, 64)
	if err != nil || n <= 0 {
		q.refuse(name, what+": a positive whole number")
		return 0
	}
	return n
}

// date reads a day as YYYY-MM-DD (or in the date style, cohort.ParseDay)
// between the years 1900 and 9998; the zero date when missing.
func (q *query) date(name string) cohort.Date {
	v := q.get(name)
	if v == "" {
		return cohort.Date{}
	}
	d, err := cohort.ParseDay(v)
	if err != nil || d.Year < 1900 || d.Year > 9998 {
		q.refuse(name, "enter a date as YYYY-MM-DD")
		return cohort.Date{}
	}
	return d
}

// check adds the field refusals of a rule's validation error (the store's
// check of a cursor, a filter's own rule); any other error is kept as is.
func (q *query) check(err error) error {
	var ve *cohort.ValidationError
	if errors.As(err, &ve) {
		for k, m := range ve.Fields {
			q.refuse(k, m)
		}
		return nil
	}
	return err
}

// err is nil when every parameter could be read, else a queryError.
func (q *query) err() error {
	if q.errs.Err() == nil {
		return nil
	}
	return &queryError{fields: q.errs.Fields}
}

// checkRawQuery refuses a query string that cannot be decoded at all (a
// stray "%", a ";" separator): url.Values would drop such a pair silently,
// so every handler checks the raw query first (Server.wrap).
func checkRawQuery(r *http.Request) error {
	if _, err := url.ParseQuery(r.URL.RawQuery); err != nil {
		return &queryError{fields: map[string]string{"address": "the query string is not properly encoded (" + err.Error() + ")"}}
	}
	return nil
}

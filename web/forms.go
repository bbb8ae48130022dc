package web

import (
	"errors"
	"fmt"
	"maps"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
)

// Forms, both ways: reading a submitted form into typed values (formReader),
// and showing a refused form again (refused). Every handler that takes a
// form uses these two, so a date, a number or a refusal reads the same on
// every page.

// refusal is a refused form as the page that shows it again needs it.
type refusal struct {
	Status  int               // 422: the input breaks a rule; 409: a stale copy, or a clash with a stored record
	Fields  map[string]string // field name -> message, shown beside the field; "form" holds the message of a 409
	Message string            // the whole refusal in words, for the top of the page
	Values  map[string]string // what was entered, by field name, to fill the form again
}

// refused reads err as the refusal of the form r submitted: a
// *cohort.ValidationError (422, its field messages), a *cohort.ConflictError
// (409, what changed since the form was opened), or another conflict with a
// stored record (409; clash names the fields it is about as the form words
// them, for example a study ID already in use; nil for none). ok is false for
// every other error, which the handler returns as it is for serveError.
func refused(r *http.Request, err error, clash map[string]string) (f refusal, ok bool) {
	if err == nil {
		return refusal{}, false
	}
	f = refusal{Status: statusOf(err), Fields: map[string]string{}, Message: humanMessage(err), Values: submitted(r)}
	var ve *cohort.ValidationError
	var ce *cohort.ConflictError
	switch {
	case errors.As(err, &ve):
		maps.Copy(f.Fields, ve.Fields)
	case errors.As(err, &ce):
		f.Fields["form"] = ce.Message
	case f.Status == http.StatusConflict:
		maps.Copy(f.Fields, clash)
		if msg, ok := clash["form"]; ok {
			f.Message = msg
		} else if clash == nil {
			f.Fields["form"] = f.Message
		}
	default:
		return refusal{}, false
	}
	return f, true
}

// renamed moves the messages of the fields the store names differently from
// the form (store name -> form input name).
func (f refusal) renamed(names map[string]string) refusal {
	out := make(map[string]string, len(f.Fields))
	for k, msg := range f.Fields {
		if to, ok := names[k]; ok {
			k = to
		}
		out[k] = msg
	}
	f.Fields = out
	return f
}

// submitted is what the form held, first value of each field.
func submitted(r *http.Request) map[string]string {
	vals := map[string]string{}
	form := r.PostForm
	if r.MultipartForm != nil {
		form = r.MultipartForm.Value
	}
	for k, v := range form {
		if len(v) > 0 {
			vals[k] = v[0]
		}
	}
	return vals
}

// fieldError is a refusal of one field, for a check a handler makes itself.
func fieldError(field, msg string) error {
	return &cohort.ValidationError{Fields: map[string]string{field: msg}}
}

// uploadErr words an upload the server cut off at its size limit (413, with
// the limit named); other errors are returned as they are.
func uploadErr(err error) error {
	var mbe *http.MaxBytesError
	if errors.As(err, &mbe) {
		return &cohort.PublicError{Message: fmt.Sprintf("the file is larger than %s; split it into several files", humanBytes(mbe.Limit)), Kind: errPayloadTooLarge}
	}
	return err
}

// formReader reads a submitted form into typed values. What cannot be read
// (a date that is not a date, a number that is not a number) is kept as a
// message beside its field; check returns them all at once.
type formReader struct {
	vals url.Values
	ve   cohort.ValidationError
}

func readForm(vals url.Values) *formReader { return &formReader{vals: vals} }

// text is a field's value without surrounding spaces.
func (f *formReader) text(name string) string { return strings.TrimSpace(f.vals.Get(name)) }

// raw is a field's value as typed (free text the store trims itself).
func (f *formReader) raw(name string) string { return f.vals.Get(name) }

// ticked reports whether a checkbox was ticked.
func (f *formReader) ticked(name string) bool { return f.vals.Get(name) == "on" }

// date reads a required YYYY-MM-DD field; what names it in the message.
func (f *formReader) date(name, what string) cohort.Date {
	d, err := cohort.ParseDate(f.vals.Get(name))
	if err != nil {
		f.ve.Add(name, "enter the "+what+" as YYYY-MM-DD")
	}
	return d
}

// optionalDate reads a YYYY-MM-DD field that may be left empty (nil).
func (f *formReader) optionalDate(name, what string) *cohort.Date {
	if f.text(name) == "" {
		return nil
	}
	d := f.date(name, what)
	return &d
}

// localTime reads an optional date and time ("YYYY-MM-DDTHH:MM", the form of
// a datetime-local input) in the zone loc; zero when left empty.
func (f *formReader) localTime(name string, loc *time.Location) time.Time {
	v := f.text(name)
	if v == "" {
		return time.Time{}
	}
	t, err := time.ParseInLocation("2006-01-02T15:04", v, loc)
	if err != nil {
		f.ve.Add(name, "enter the time as YYYY-MM-DD HH:MM")
	}
	return t
}

// whole reads a whole number.
func (f *formReader) whole(name string) int {
	v := f.vals.Get(name)
	n, err := strconv.Atoi(strings.TrimSpace(v))
	if err != nil {
		f.ve.Add(name, fmt.Sprintf("%q is not a whole number", v))
	}
	return n
}

// version reads the version a form carries; anything unreadable is 0, a
// version no record has, so the store refuses it as a stale copy.
func (f *formReader) version() int {
	v, _ := strconv.Atoi(f.text("version"))
	return v
}

// fail records a problem with a field found while reading it.
func (f *formReader) fail(name, msg string) { f.ve.Add(name, msg) }

// check returns nil when every field could be read: the store then applies
// the rules. Otherwise it returns what could not be read, completed with
// what rules (the domain's own check, given the values that were read) says
// about the other fields, so one refusal names every problem; a field keeps
// its reading message. rules may be nil.
func (f *formReader) check(rules func() error) error {
	if f.ve.Err() == nil {
		return nil
	}
	if rules != nil {
		var more *cohort.ValidationError
		if errors.As(rules(), &more) {
			for k, msg := range more.Fields {
				f.ve.Add(k, msg)
			}
		}
	}
	return &f.ve
}

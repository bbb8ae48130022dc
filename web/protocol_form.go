package web

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"reflect"
	"strconv"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
)

func jsonName(f reflect.StructField) (name string, inline, skip bool) {
	tag := f.Tag.Get("json")
	if tag == "-" || !f.IsExported() {
		return "", false, true
	}
	name, _, _ = strings.Cut(tag, ",")
	if name == "" && f.Anonymous && f.Type.Kind() == reflect.Struct {
		return "", true, false
	}
	if name == "" {
		name = f.Name
	}
	return name, false, false
}

// setLeaf stores the text of one form input into the protocol at path; the
// error is the message to show beside the input.
func setLeaf(p *screen.Protocol, path, text string) error {
	v := reflect.ValueOf(p).Elem()
	f, err := locate(v, path)
	if err != nil {
		return err
	}
	text = strings.TrimSpace(text)
	switch f.Kind() {
	case reflect.Bool:
		switch strings.ToLower(text) {
		case "true", "yes", "on":
			f.SetBool(true)
		case "false", "no", "":
			f.SetBool(false)
		default:
			return errors.New("choose yes or no")
		}
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		n, err := strconv.ParseInt(text, 10, 64)
		if err != nil || f.OverflowInt(n) {
			return errors.New("enter a whole number")
		}
		f.SetInt(n)
	case reflect.Float32, reflect.Float64:
		x, err := strconv.ParseFloat(text, 64)
		if err != nil {
			return errors.New("enter a number, e.g. 7.5")
		}
		f.SetFloat(x)
	default:
		return fmt.Errorf("%s cannot be edited here", path)
	}
	return nil
}

// locate finds the settable value at a JSON path such as "windows[1].min_share"
// or "rr.segment_beats".
func locate(v reflect.Value, path string) (reflect.Value, error) {
	for part := range strings.SplitSeq(path, ".") {
		name, idx, hasIdx := strings.Cut(part, "[")
		f, ok := fieldByJSON(v, name)
		if !ok {
			return reflect.Value{}, fmt.Errorf("no parameter %s", path)
		}
		v = f
		if hasIdx {
			i, err := strconv.Atoi(strings.TrimSuffix(idx, "]"))
			if err != nil || v.Kind() != reflect.Slice || i < 0 || i >= v.Len() {
				return reflect.Value{}, fmt.Errorf("no parameter %s", path)
			}
			v = v.Index(i)
		}
	}
	return v, nil
}

func fieldByJSON(v reflect.Value, name string) (reflect.Value, bool) {
	if v.Kind() != reflect.Struct {
		return reflect.Value{}, false
	}
	t := v.Type()
	for i := range t.NumField() {
		n, inline, skip := jsonName(t.Field(i))
		switch {
		case skip:
		case inline:
			if f, ok := fieldByJSON(v.Field(i), name); ok {
				return f, true
			}
		case n == name:
			return v.Field(i), true
		}
	}
	return reflect.Value{}, false
}

// cloneProtocol copies p so edits never reach the original's window slice.
func cloneProtocol(p screen.Protocol) screen.Protocol {
	q := p
	q.Windows = append([]screen.WindowRule(nil), p.Windows...)
	return q
}

// protocolFromForm applies the submitted inputs ("p." + path) to a copy of
// base. Inputs left out keep the base's value. It returns the edited protocol,
// the submitted texts by path (to show the form again) and the inputs that
// could not be read.
func protocolFromForm(base screen.Protocol, get func(string) (string, bool)) (screen.Protocol, map[string]string, map[string]string) {
	p := cloneProtocol(base)
	vals := map[string]string{}
	errs := map[string]string{}
	for _, l := range base.Params() {
		text, ok := get("p." + l.Path)
		if !ok {
			vals[l.Path] = l.Value
			continue
		}
		vals[l.Path] = text
		if err := setLeaf(&p, l.Path, text); err != nil {
			errs[l.Path] = err.Error()
		}
	}
	return p, vals, errs
}

// decodeProtocolJSON reads parameters an administrator typed as JSON. Unknown
// fields are refused, since a misspelt name would otherwise be ignored and the
// old value silently kept; problems are reported with line and column.
func decodeProtocolJSON(text string) (screen.Protocol, error) {
	var p screen.Protocol
	dec := json.NewDecoder(strings.NewReader(text))
	dec.DisallowUnknownFields()
	fail := func(msg string) (screen.Protocol, error) {
		return p, &cohort.ValidationError{Fields: map[string]string{"params": msg}}
	}
	if err := dec.Decode(&p); err != nil {
		var syn *json.SyntaxError
		var typ *json.UnmarshalTypeError
		switch {
		case errors.As(err, &syn):
			line, col := lineCol(text, syn.Offset)
			return fail(fmt.Sprintf("not valid JSON near line %d, column %d: %s", line, col, strings.TrimPrefix(syn.Error(), "json: ")))
		case errors.As(err, &typ):
			line, col := lineCol(text, typ.Offset)
			return fail(fmt.Sprintf("line %d, column %d: %s needs a %s, not a JSON %s", line, col, typ.Field, typ.Type, typ.Value))
		case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF):
			return fail("the JSON ends too early; give one complete object")
		}
		msg := err.Error()
		if f, ok := strings.CutPrefix(msg, "json: unknown field "); ok {
			return fail("unknown field " + f + "; the fields are those shown on the version's page")
		}
		return fail(msg)
	}
	if dec.More() {
		return fail("there is more text after the closing brace; give one JSON object")
	}
	return p, nil
}

func lineCol(text string, off int64) (int, int) {
	off = max(0, min(off, int64(len(text))))
	before := text[:off]
	return strings.Count(before, "\n") + 1, int(off) - strings.LastIndex(before, "\n")
}

// protocolJSON formats parameters indented, in stored field order.
func protocolJSON(p screen.Protocol) string {
	b, err := json.Marshal(p)
	if err != nil {
		return ""
	}
	var out bytes.Buffer
	if err := json.Indent(&out, b, "", "  "); err != nil {
		return string(b)
	}
	return out.String()
}

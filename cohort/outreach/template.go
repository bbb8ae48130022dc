package outreach

import (
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
)

// Placeholder is a name a template may write as {{name}}. The set is fixed
// and documented (Placeholders); a template using any other name is refused.
type Placeholder string

// The placeholders of message templates.
const (
	FirstName      Placeholder = "first_name"      // the participant's given name
	FamilyName     Placeholder = "family_name"     // the participant's family name
	StudyName      Placeholder = "study_name"      // the study's name (study settings)
	ContactLine    Placeholder = "contact_line"    // how to reach the study team (study settings, contact route)
	StudyNumber    Placeholder = "study_number"    // the participant's study ID, to quote when they get in touch
	TrackingNumber Placeholder = "tracking_number" // the recorder's tracking number on the case
	ReplyBy        Placeholder = "reply_by"        // a day N working days after sending (N: the template's reply days), study calendar
)

type placeholderInfo struct {
	meaning string
	example string
	missing string // why a message cannot be made when the value is empty
}

var placeholderTable = map[Placeholder]placeholderInfo{
	FirstName:      {"the participant's given name", "Wren", "the participant's first name is not on file"},
	FamilyName:     {"the participant's family name", "Alderby", "the participant's family name is not on file"},
	StudyName:      {"the study's name, from the study settings", "Riverside Rhythm Study", "the study has no name yet (Administration, study settings)"},
	ContactLine:    {"how to reach the study team, from the study settings (contact route)", "call 555-0100 on working days, 9:00 to 17:00", "the study's contact route is not set (Administration, study settings)"},
	StudyNumber:    {"the participant's study ID, to quote when they get in touch", "RV-0042", "the participant has no study ID"},
	TrackingNumber: {"the recorder's tracking number on the case", "TRK-7781", "the case has no tracking number yet: record the recorder's shipment with its number first"},
	ReplyBy:        {"a day the template's reply days (working days, study calendar) after sending, written out", "Friday 11 December 2026", "no reply-by day could be computed: the study calendar has no working days"},
}

// Placeholders lists the placeholders in the order the editor documents them.
func Placeholders() []Placeholder {
	return []Placeholder{FirstName, FamilyName, StudyName, ContactLine, StudyNumber, TrackingNumber, ReplyBy}
}

// Meaning says what the placeholder stands for.
func (p Placeholder) Meaning() string { return placeholderTable[p].meaning }

// Example is a value the documentation shows.
func (p Placeholder) Example() string { return placeholderTable[p].example }

// Tag is how a template writes the placeholder.
func (p Placeholder) Tag() string { return "{{" + string(p) + "}}" }

func (p Placeholder) valid() bool { _, ok := placeholderTable[p]; return ok }

// Limits of a template, in characters.
const (
	MaxSubject   = 120
	MaxBody      = 5000
	MaxTextBody  = 300 // a text message's template: room for the values within three 153-character segments
	MinReplyDays = 1
	MaxReplyDays = 30
)

// Template is the wording of one purpose on one channel, as an administrator
// writes it. A saved template is never changed: editing makes a new version.
type Template struct {
	Purpose   Purpose
	Channel   followup.Channel
	Subject   string // fixed text: e-mail subject or a letter's heading; empty for text messages
	Body      string
	ReplyDays int // working days to the {{reply_by}} day
}

// token is one piece of a template: literal text, or a placeholder.
type token struct {
	text string
	ph   Placeholder // "" for literal text
}

// parse splits text into literal text and placeholders. A "{{" without its
// "}}" and a name outside the fixed set are refused with the line they are on.
func parse(text string) ([]token, error) {
	var out []token
	rest := text
	offset := 0
	lineOf := func(pos int) int { return strings.Count(text[:pos], "\n") + 1 }
	for {
		i := strings.Index(rest, "{{")
		if j := strings.Index(rest, "}}"); j >= 0 && (i < 0 || j < i) {
			return nil, fmt.Errorf("line %d: \"}}\" without an opening \"{{\"", lineOf(offset+j))
		}
		if i < 0 {
			if rest != "" {
				out = append(out, token{text: rest})
			}
			return out, nil
		}
		if i > 0 {
			out = append(out, token{text: rest[:i]})
		}
		j := strings.Index(rest[i+2:], "}}")
		if j < 0 || strings.Contains(rest[i+2:i+2+j], "{{") {
			return nil, fmt.Errorf("line %d: \"{{\" is not closed with \"}}\"", lineOf(offset+i))
		}
		name := strings.TrimSpace(rest[i+2 : i+2+j])
		ph := Placeholder(name)
		if !ph.valid() {
			return nil, fmt.Errorf("line %d: unknown placeholder {{%s}}; use one of %s", lineOf(offset+i), name, placeholderList())
		}
		out = append(out, token{ph: ph})
		offset += i + 2 + j + 2
		rest = rest[i+2+j+2:]
	}
}

func placeholderList() string {
	var tags []string
	for _, p := range Placeholders() {
		tags = append(tags, p.Tag())
	}
	return strings.Join(tags, ", ")
}

// Uses lists the placeholders the body uses, each once, in order of first use.
func (t Template) Uses() []Placeholder {
	toks, _ := parse(t.Body)
	var out []Placeholder
	for _, tk := range toks {
		if tk.ph != "" && !slices.Contains(out, tk.ph) {
			out = append(out, tk.ph)
		}
	}
	return out
}

// Check refuses a template that cannot be saved, field by field: an unknown
// purpose or a channel the desk does not send on; a subject that is missing
// (e-mail, letter) or present (text message), too long, holding a
// placeholder (subjects are fixed text, so nothing about the person reaches a
// subject line) or a word of the list words (subjects never carry health
// information); a body that is empty, too long, malformed, using an unknown
// placeholder or missing one its purpose requires; reply days out of range.
// Words of the list in the body are not refused here: Warnings reports them
// for the editor to decide.
func (t Template) Check(words WordList) error {
	var ve cohort.ValidationError
	if !t.Purpose.Valid() {
		ve.Add("purpose", "choose what the message is for")
	}
	if !Sendable(t.Channel) {
		ve.Add("channel", "choose e-mail, text message or letter")
	}
	subject := strings.TrimSpace(t.Subject)
	switch {
	case t.Channel == followup.ChannelText && subject != "":
		ve.Add("subject", "a text message has no subject; leave it empty")
	case t.Channel != followup.ChannelText && subject == "" && Sendable(t.Channel):
		ve.Add("subject", "write a subject")
	case len(subject) > MaxSubject:
		ve.Add("subject", fmt.Sprintf("use at most %d characters", MaxSubject))
	case strings.Contains(subject, "{{") || strings.Contains(subject, "}}"):
		ve.Add("subject", "a subject is fixed text: no placeholders, so nothing about the person reaches a subject line")
	case strings.ContainsAny(subject, "\r\n"):
		ve.Add("subject", "a subject is one line")
	default:
		if hits := words.Find(subject); len(hits) > 0 {
			ve.Add("subject", fmt.Sprintf("subjects never carry health information: %q is on the study's word list", hits[0].Term))
		}
	}
	body := strings.TrimSpace(t.Body)
	limit := MaxBody
	if t.Channel == followup.ChannelText {
		limit = MaxTextBody
	}
	switch {
	case body == "":
		ve.Add("body", "write the message")
	case len(body) > limit:
		ve.Add("body", fmt.Sprintf("use at most %d characters", limit))
	default:
		if _, err := parse(body); err != nil {
			ve.Add("body", err.Error())
		} else if t.Purpose.Valid() {
			uses := t.Uses()
			var missing []string
			for _, p := range t.Purpose.Required() {
				if !slices.Contains(uses, p) {
					missing = append(missing, p.Tag())
				}
			}
			if len(missing) > 0 {
				ve.Add("body", "a "+t.Purpose.Label()+" message must use "+strings.Join(missing, " and "))
			}
		}
	}
	if t.ReplyDays < MinReplyDays || t.ReplyDays > MaxReplyDays {
		ve.Add("reply_days", fmt.Sprintf("use %d to %d working days", MinReplyDays, MaxReplyDays))
	}
	return ve.Err()
}

// Warning is a word of the study's list found in a template's body, or in a
// study-wide value the template fills in, for the editor to look at before
// saving.
type Warning struct {
	Line int
	Term string
	// Value is the placeholder whose study-wide value holds the term (the
	// study's name, its contact line: the same in every message); "" when
	// the term is in the template's own text, on Line.
	Value Placeholder
}

// String words the warning for the editor.
func (w Warning) String() string {
	const rule = " is on the study's word list; messages never state a diagnosis or a screening result"
	if w.Value != "" {
		return "{{" + string(w.Value) + "}} (" + placeholderTable[w.Value].meaning + ") holds \"" + w.Term + "\", which" + rule
	}
	return "line " + strconv.Itoa(w.Line) + ": \"" + w.Term + "\"" + rule
}

// Warnings lists the words of the list the body uses, by line.
func (t Template) Warnings(words WordList) []Warning {
	var out []Warning
	for i, line := range strings.Split(t.Body, "\n") {
		for _, h := range words.Find(line) {
			out = append(out, Warning{Line: i + 1, Term: h.Term})
		}
	}
	return out
}

// ValueWarnings lists the words of the list in the study-wide values the
// template fills in: the study's name and its contact line are the same in
// every message, so a word of the list there reaches every participant the
// template writes to. Values of one participant are not checked here.
func (t Template) ValueWarnings(words WordList, v Values) []Warning {
	toks, err := parse(t.Body)
	if err != nil {
		return nil
	}
	var out []Warning
	seen := map[Placeholder]bool{}
	for _, tk := range toks {
		if (tk.ph != StudyName && tk.ph != ContactLine) || seen[tk.ph] {
			continue
		}
		seen[tk.ph] = true
		for _, h := range words.Find(v[tk.ph]) {
			out = append(out, Warning{Term: h.Term, Value: tk.ph})
		}
	}
	return out
}

// Values are what the placeholders stand for in one message.
type Values map[Placeholder]string

// Message is a template made out for one participant.
type Message struct {
	Subject string
	Body    string
}

// Render makes the template out with values. A placeholder the body uses
// whose value is empty is refused with the reason, on the field "message",
// so the desk can say why it cannot send.
func (t Template) Render(v Values) (Message, error) {
	toks, err := parse(t.Body)
	if err != nil {
		return Message{}, &cohort.ValidationError{Fields: map[string]string{"message": "the template cannot be used: " + err.Error()}}
	}
	var b strings.Builder
	for _, tk := range toks {
		if tk.ph == "" {
			b.WriteString(tk.text)
			continue
		}
		val := strings.TrimSpace(v[tk.ph])
		if val == "" {
			return Message{}, &cohort.ValidationError{Fields: map[string]string{"message": placeholderTable[tk.ph].missing}}
		}
		b.WriteString(val)
	}
	return Message{Subject: strings.TrimSpace(t.Subject), Body: strings.TrimSpace(b.String())}, nil
}

// ContactLineOf is the study's contact route as {{contact_line}} writes it:
// without a final full stop, since templates write it into a sentence.
func ContactLineOf(route string) string {
	return strings.TrimRight(strings.TrimSpace(route), ". ")
}

// ExampleValues are the documented examples, for a preview without a
// participant.
func ExampleValues() Values {
	v := Values{}
	for _, p := range Placeholders() {
		v[p] = p.Example()
	}
	return v
}

// ReplyDay is the {{reply_by}} day of a message sent at sent: days working
// days after the day it is sent, on the study calendar cal; the zero date
// when the calendar has no working days.
func ReplyDay(cal followup.Calendar, sent time.Time, days int) cohort.Date {
	due := cal.AddWorkingDays(sent, days)
	if due.IsZero() {
		return cohort.Date{}
	}
	return cal.DueDay(due)
}

// WrittenDay writes a day out for a letter or an e-mail, "Friday 11
// December 2026": no numeric form that readers in different countries read
// differently.
func WrittenDay(d cohort.Date) string {
	if d.IsZero() {
		return ""
	}
	return d.In(time.UTC).Format("Monday 2 January 2006")
}

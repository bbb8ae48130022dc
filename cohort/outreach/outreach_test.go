package outreach

import (
	"errors"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
)

func fieldMsg(t *testing.T, err error, field string) string {
	t.Helper()
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("error %v is not a validation error", err)
	}
	return ve.Fields[field]
}

func TestDefaultTemplatesFollowTheWordingRule(t *testing.T) {
	words := DefaultWords()
	seen := map[[2]string]bool{}
	for _, tp := range DefaultTemplates() {
		key := [2]string{string(tp.Purpose), string(tp.Channel)}
		if seen[key] {
			t.Errorf("two default templates for %v", key)
		}
		seen[key] = true
		if err := tp.Check(words); err != nil {
			t.Errorf("%s by %s: %v", tp.Purpose, tp.Channel, err)
		}
		if w := tp.Warnings(words); len(w) > 0 {
			t.Errorf("%s by %s warns: %v", tp.Purpose, tp.Channel, w)
		}
		if hits := words.Find(tp.Subject); len(hits) > 0 {
			t.Errorf("%s subject %q carries %v", tp.Purpose, tp.Subject, hits)
		}
		if !strings.Contains(tp.Body, ContactLine.Tag()) {
			t.Errorf("%s by %s does not say how to reach the team", tp.Purpose, tp.Channel)
		}
	}
	if want := len(Purposes()) * len(SendableChannels()); len(seen) != want {
		t.Errorf("%d default templates, want %d (every purpose on every channel)", len(seen), want)
	}
}

func TestTemplateCheckRefusals(t *testing.T) {
	ok := Template{Purpose: PurposeReminder, Channel: followup.ChannelEmail, Subject: "Hello", Body: "Hi {{first_name}}, {{contact_line}}", ReplyDays: 5}
	if err := ok.Check(DefaultWords()); err != nil {
		t.Fatalf("a good template refused: %v", err)
	}
	tests := []struct {
		name, field, want string
		edit              func(*Template)
	}{
		{"unknown placeholder", "body", "line 2: unknown placeholder {{diagnosis_text}}", func(tp *Template) { tp.Body = "Hi\n{{diagnosis_text}} {{contact_line}}" }},
		{"unclosed", "body", "line 1: \"{{\" is not closed", func(tp *Template) { tp.Body = "Hi {{first_name {{contact_line}}" }},
		{"stray close", "body", "without an opening", func(tp *Template) { tp.Body = "Hi first_name}} {{contact_line}}" }},
		{"missing required", "body", "must use {{contact_line}}", func(tp *Template) { tp.Body = "Hi {{first_name}}" }},
		{"missing two required", "body", "must use {{contact_line}} and {{reply_by}}", func(tp *Template) { tp.Purpose, tp.Body = PurposeFirstContact, "Hi" }},
		{"subject placeholder", "subject", "no placeholders", func(tp *Template) { tp.Subject = "Hello {{first_name}}" }},
		{"subject health word", "subject", `"heart" is on the study's word list`, func(tp *Template) { tp.Subject = "About your heart" }},
		{"subject prefix word", "subject", `"result*"`, func(tp *Template) { tp.Subject = "Your Results" }},
		{"no subject", "subject", "write a subject", func(tp *Template) { tp.Subject = " " }},
		{"text with subject", "subject", "no subject", func(tp *Template) { tp.Channel = followup.ChannelText }},
		{"long text", "body", "at most 300", func(tp *Template) {
			tp.Channel, tp.Subject = followup.ChannelText, ""
			tp.Body = strings.Repeat("a", 300) + " {{contact_line}}"
		}},
		{"phone", "channel", "choose e-mail", func(tp *Template) { tp.Channel = followup.ChannelPhone }},
		{"reply days", "reply_days", "1 to 30", func(tp *Template) { tp.ReplyDays = 0 }},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			tp := ok
			tt.edit(&tp)
			err := tp.Check(DefaultWords())
			if err == nil {
				t.Fatal("accepted")
			}
			if got := fieldMsg(t, err, tt.field); !strings.Contains(got, tt.want) {
				t.Fatalf("%s: %q, want it to contain %q", tt.field, got, tt.want)
			}
		})
	}
}

func TestWarningsNameLineAndTerm(t *testing.T) {
	tp := Template{Body: "Dear {{first_name}},\nYour screening result was positive.\nNon-urgent: {{contact_line}}"}
	got := tp.Warnings(DefaultWords())
	want := []Warning{{Line: 2, Term: "result*"}, {Line: 2, Term: "positive"}, {Line: 3, Term: "urgent*"}}
	if len(got) != len(want) {
		t.Fatalf("warnings %v, want %v", got, want)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("warning %d: %v, want %v", i, got[i], want[i])
		}
	}
	// Whole words only: "heartfelt" is not "heart", "Afton" is not "AF".
	if hits := DefaultWords().Find("Heartfelt thanks from Afton"); len(hits) != 0 {
		t.Errorf("partial words matched: %v", hits)
	}
	if hits := (WordList{Terms: []string{"sinus rhythm"}}).Find("a Sinus  Rhythm trace"); len(hits) != 1 {
		t.Errorf("a two-word term not found: %v", hits)
	}
}

func TestParseWords(t *testing.T) {
	w, err := ParseWords("heart\n\n  diagnos* \nHEART\nsinus rhythm")
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(w.Terms, "|"); got != "heart|diagnos*|sinus rhythm" {
		t.Fatalf("terms %q", got)
	}
	if _, err := ParseWords("ok\n<script>"); err == nil || !strings.Contains(fieldMsg(t, err, "words"), "line 2") {
		t.Fatalf("a bad term: %v", err)
	}
}

func TestRenderAndMissingValues(t *testing.T) {
	tp := Template{Purpose: PurposeRecorderOut, Channel: followup.ChannelEmail, Subject: "Parcel", Body: "Dear {{ first_name }}, tracking {{tracking_number}}. {{contact_line}}"}
	v := ExampleValues()
	m, err := tp.Render(v)
	if err != nil {
		t.Fatal(err)
	}
	if m.Body != "Dear Wren, tracking TRK-7781. call 555-0100 on working days, 9:00 to 17:00" || m.Subject != "Parcel" {
		t.Fatalf("rendered %+v", m)
	}
	v[TrackingNumber] = " "
	_, err = tp.Render(v)
	if got := fieldMsg(t, err, "message"); !strings.Contains(got, "no tracking number") {
		t.Fatalf("missing tracking number: %q", got)
	}
}

// TestReplyDay counts working days on the study calendar: sent on Friday
// 4 December 2026 with 5 working days and Tuesday 8 December a closure day,
// the days counted are Mon 7, Wed 9, Thu 10, Fri 11, Mon 14 (computed by
// hand from the 2026 calendar).
func TestReplyDay(t *testing.T) {
	loc, _ := time.LoadLocation("America/Chicago")
	cal := followup.NewCalendar(loc, cohort.Date{Year: 2026, Month: 12, Day: 8})
	sent := time.Date(2026, 12, 4, 16, 30, 0, 0, loc)
	got := ReplyDay(cal, sent, 5)
	if got != (cohort.Date{Year: 2026, Month: 12, Day: 14}) {
		t.Fatalf("reply day %v", got)
	}
	if s := WrittenDay(got); s != "Monday 14 December 2026" {
		t.Fatalf("written %q", s)
	}
}

func TestDecide(t *testing.T) {
	ny, _ := time.LoadLocation("America/New_York")
	all := Contact{Email: true, Phone: true, Address: true}
	// 22:30 local on Saturday 7 March 2026; quiet until 08:00 on Sunday 8
	// March, the day US daylight saving time begins (second Sunday of March;
	// verified): 08:00 EDT is 12:00 UTC.
	now := time.Date(2026, 3, 7, 22, 30, 0, 0, ny)
	at, held, err := Decide(Defaults(), all, followup.ChannelEmail, now, ny)
	if err != nil || !held || !at.Equal(time.Date(2026, 3, 8, 12, 0, 0, 0, time.UTC)) {
		t.Fatalf("e-mail in quiet hours: %v %v %v", at.UTC(), held, err)
	}
	// The same moment is 20:30 in Los Angeles: outside quiet hours there.
	la, _ := time.LoadLocation("America/Los_Angeles")
	if at, held, err := Decide(Defaults(), all, followup.ChannelEmail, now, la); err != nil || held || !at.Equal(now) {
		t.Fatalf("e-mail outside quiet hours: %v %v %v", at, held, err)
	}
	// Early morning, quiet until 08:00 the same day.
	early := time.Date(2026, 6, 2, 6, 59, 0, 0, ny)
	if at, held, _ := Decide(Defaults(), all, followup.ChannelEmail, early, ny); !held || !at.Equal(time.Date(2026, 6, 2, 8, 0, 0, 0, ny)) {
		t.Fatalf("early morning: %v %v", at, held)
	}
	// Letters are not held.
	if _, held, err := Decide(Defaults(), all, followup.ChannelLetter, now, ny); err != nil || held {
		t.Fatalf("letter: %v %v", held, err)
	}
	refusals := []struct {
		name string
		p    Preferences
		c    Contact
		ch   followup.Channel
		want string
	}{
		{"text without consent", Defaults(), all, followup.ChannelText, "has not agreed"},
		{"opted out", func() Preferences { p := Defaults(); p.OptedOut[followup.ChannelEmail] = true; return p }(), all, followup.ChannelEmail, "opted out of e-mails"},
		{"no address", Defaults(), Contact{Email: true}, followup.ChannelLetter, "no postal address"},
		{"phone", Defaults(), all, followup.ChannelPhone, "does not send by phone"},
	}
	for _, r := range refusals {
		_, _, err := Decide(r.p, r.c, r.ch, now, ny)
		if got := fieldMsg(t, err, "channel"); !strings.Contains(got, r.want) {
			t.Errorf("%s: %q, want %q", r.name, got, r.want)
		}
	}
	// No quiet hours when the bounds are equal.
	p := Defaults()
	p.QuietFrom, p.QuietUntil = 0, 0
	if _, held, _ := Decide(p, all, followup.ChannelEmail, now, ny); held {
		t.Fatal("held without quiet hours")
	}
}

func TestPreferencesCheck(t *testing.T) {
	p := Defaults()
	p.Preferred = followup.ChannelText
	if got := fieldMsg(t, p.Check(), "preferred"); !strings.Contains(got, "agreed to") {
		t.Fatalf("preferred text without consent: %q", got)
	}
	p.Consent[followup.ChannelText] = true
	if err := p.Check(); err != nil {
		t.Fatal(err)
	}
	if c, err := ParseClock("21:05"); err != nil || c != 21*60+5 || c.String() != "21:05" {
		t.Fatalf("clock %v %v", c, err)
	}
}

// TestAddressAreaIsInEveryWindow: the address area lies inside the part of
// every window envelope for its paper that the window shows with the folded
// sheet anywhere inside the envelope, checked at the corners of the sheet's
// play and in between.
func TestAddressAreaIsInEveryWindow(t *testing.T) {
	for _, p := range []Paper{PaperA4, PaperLetter} {
		area := AddressArea(p)
		if area.W < 60 || area.H < 12 {
			t.Fatalf("%s: address area %+v too small for three lines", p.Name, area)
		}
		n := 0
		for _, e := range Envelopes {
			if e.Paper != p {
				continue
			}
			n++
			dx, dy := e.W-p.W, e.H-e.Panel
			for i := 0; i <= 4; i++ {
				for j := 0; j <= 4; j++ {
					ox, oy := dx*float64(i)/4, dy*float64(j)/4
					// The window in sheet coordinates with the sheet shifted by (ox, oy).
					win := Rect{X: e.Window.X - ox, Y: e.Window.Y - oy, W: e.Window.W, H: e.Window.H}
					if !contains(win, area) {
						t.Errorf("%s in %s shifted (%.1f, %.1f): window %+v does not show %+v", p.Name, e.Name, ox, oy, win, area)
					}
				}
			}
			if area.Bottom() > e.Panel {
				t.Errorf("%s: the address runs past the %s fold", p.Name, e.Name)
			}
		}
		if n == 0 {
			t.Errorf("no envelope for %s", p.Name)
		}
	}
	// ISO 269: DL 110 x 220 mm, C5 162 x 229 mm (verified).
	if e := Envelopes[0]; e.W != 220 || e.H != 110 {
		t.Errorf("DL %v x %v", e.W, e.H)
	}
	if e := Envelopes[1]; e.W != 229 || e.H != 162 {
		t.Errorf("C5 %v x %v", e.W, e.H)
	}
}

func TestSuggested(t *testing.T) {
	if got := Suggested(followup.Open); len(got) != 1 || got[0] != PurposeFirstContact {
		t.Fatalf("open: %v", got)
	}
	if got := Suggested(followup.Referred); len(got) != 0 {
		t.Fatalf("referred: %v", got)
	}
}

func FuzzTemplateParse(f *testing.F) {
	for _, s := range []string{"", "Hi {{first_name}}", "{{", "}}", "{{ {{x}} }}", "a{{contact_line}}b{{reply_by}}", "{{\n}}"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		toks, err := parse(s)
		if err != nil {
			return
		}
		var b strings.Builder
		for _, tk := range toks {
			if tk.ph != "" {
				if !tk.ph.valid() {
					t.Fatalf("invalid placeholder %q accepted", tk.ph)
				}
				b.WriteString(tk.ph.Tag())
			} else {
				if strings.Contains(tk.text, "{{") || strings.Contains(tk.text, "}}") {
					t.Fatalf("literal %q holds braces", tk.text)
				}
				b.WriteString(tk.text)
			}
		}
		if len(b.String()) > len(s) {
			t.Fatalf("round trip grew: %q -> %q", s, b.String())
		}
	})
}

// contains reports whether o lies inside r (edges included, to a
// micrometre).
func contains(r, o Rect) bool {
	const eps = 1e-3
	return o.X >= r.X-eps && o.Y >= r.Y-eps && o.Right() <= r.Right()+eps && o.Bottom() <= r.Bottom()+eps
}

func TestContactLineOf(t *testing.T) {
	if got := ContactLineOf(" call 555-0100 on working days. "); got != "call 555-0100 on working days" {
		t.Fatalf("%q", got)
	}
}

// The study-wide values a template fills in reach every message it writes:
// a word of the list in the study's name or contact line is a warning for
// the template that uses them, named by its placeholder; a template that
// does not use the value, or a participant's own value, gives none.
func TestValueWarningsNameThePlaceholder(t *testing.T) {
	words := DefaultWords()
	study := Values{StudyName: "Irregular Heartbeat Screening Study", ContactLine: "call 555-0100 on working days", FirstName: "Positive"}
	uses := Template{Body: "Dear {{first_name}},\nA message from {{study_name}}: please {{contact_line}}. {{study_name}}"}
	got := uses.ValueWarnings(words, study)
	if len(got) == 0 {
		t.Fatalf("no warning for a study name holding words of the list (%q)", study[StudyName])
	}
	for _, w := range got {
		if w.Value != StudyName || w.Line != 0 {
			t.Errorf("warning %+v: want one of the study name's, without a line", w)
		}
		if s := w.String(); !strings.HasPrefix(s, "{{study_name}} (the study's name") || !strings.Contains(s, `"`+w.Term+`"`) {
			t.Errorf("warning reads %q", s)
		}
	}
	if len(got) != len(words.Find(study[StudyName])) {
		t.Errorf("%d warnings for a value used twice, want one per word found (%d)", len(got), len(words.Find(study[StudyName])))
	}
	if w := (Template{Body: "Dear {{first_name}}, please {{contact_line}}."}).ValueWarnings(words, study); len(w) != 0 {
		t.Errorf("warnings %v for a template that does not use the study name", w)
	}
}

// The morning job's next run: a put-off summary is tried again a quarter of
// an hour later while the morning lasts (four hours from the summary time,
// the same day), else the next working morning. Monday 1 June 2026 in
// Chicago; summaries at 07:00.
func TestNextSummaryRun(t *testing.T) {
	loc, err := time.LoadLocation("America/Chicago")
	if err != nil {
		t.Fatal(err)
	}
	st := followup.DefaultStudySettings()
	st.TimeZone = "America/Chicago"
	cal := st.Calendar()
	at := Clock(7 * 60)
	mon := func(h, m int) time.Time { return time.Date(2026, 6, 1, h, m, 0, 0, loc) }
	tue7 := time.Date(2026, 6, 2, 7, 0, 0, 0, loc)
	for _, tt := range []struct {
		now    time.Time
		putOff bool
		want   time.Time
	}{
		{mon(7, 0), false, tue7},
		{mon(7, 0), true, mon(7, 15)},
		{mon(10, 45), true, mon(11, 0)}, // the last try: four hours after 07:00
		{mon(10, 50), true, tue7},       // 11:05 is past the morning
		{time.Date(2026, 6, 5, 10, 0, 0, 0, loc), true, time.Date(2026, 6, 5, 10, 15, 0, 0, loc)}, // Friday
		{time.Date(2026, 6, 5, 11, 30, 0, 0, loc), true, time.Date(2026, 6, 8, 7, 0, 0, 0, loc)},  // then Monday
		{time.Date(2026, 6, 6, 9, 0, 0, 0, loc), true, time.Date(2026, 6, 8, 7, 0, 0, 0, loc)},    // Saturday: no retry
	} {
		if got := NextSummaryRun(cal, loc, tt.now, at, tt.putOff); !got.Equal(tt.want) {
			t.Errorf("NextSummaryRun(%s, put off %v) = %s, want %s", tt.now.Format("Mon 15:04"), tt.putOff, got.Format("Mon 2 Jan 15:04"), tt.want.Format("Mon 2 Jan 15:04"))
		}
	}
}

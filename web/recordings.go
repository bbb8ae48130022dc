package web

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"strings"
	"time"

	"cohortdesk/assets"
	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"

	"github.com/a-h/templ"
)

// recordingStore is what the recording pages, the confirmations area and the
// agreement statistics need from the database.
type recordingStore interface {
	AddRecording(ctx context.Context, a cohort.Actor, caseID int64, in ecg.RecordingInput) (db.Recording, error)
	Recording(ctx context.Context, id int64) (db.Recording, error)
	CaseRecordings(ctx context.Context, caseID int64) ([]db.Recording, error)
	RecordingWaveform(ctx context.Context, id int64) (ecg.Waveform, error)
	AddOverRead(ctx context.Context, a cohort.Actor, recordingID int64, in db.OverReadInput) (db.Recording, error)
	ChooseRecordingLead(ctx context.Context, a cohort.Actor, recordingID int64, lead int) (db.Recording, error)
	Confirmations(ctx context.Context, limit int) (db.Confirmations, error)
	overReadTools
	Agreement(ctx context.Context, f cascade.Filter) (cascade.Agreement, error)
}

// recordingMemory is how much of an upload is held in memory; the rest of a
// (rare) large file waits in a temporary file until intake has read it.
const recordingMemory = 8 << 20

// verdictView words a recording's verdict for badges.
func verdictView(r db.Recording) (string, components.Tone) {
	v := r.Conclusion
	switch {
	case v.Status == overread.Unread:
		return "waiting for an over-read", components.Warn
	case v.Status == overread.Disagreed:
		return "readers disagree", components.Alarm
	case r.TooShort:
		return v.Rhythm.Label() + " (" + views.TooShortMark + ")", components.Neutral
	case v.Rhythm == overread.AF:
		return v.Rhythm.Label(), components.Alarm
	case v.Rhythm == overread.Uninterpretable:
		return v.Rhythm.Label(), components.Warn
	}
	return v.Rhythm.Label(), components.Info
}

// acceptsRecordings says why a case cannot take a recording now, "" when it
// can (followup.TakesRecordings, as a sentence).
func acceptsRecordings(st followup.State) string {
	msg := followup.TakesRecordings(st)
	if msg == "" {
		return ""
	}
	return strings.ToUpper(msg[:1]) + msg[1:] + "."
}

// caseECG builds the recordings panel of a case page.
func (s *Server) caseECG(r *http.Request, c db.Case, errs map[string]string, now time.Time) (templ.Component, error) {
	recs, err := s.store.CaseRecordings(r.Context(), c.ID)
	if err != nil {
		return nil, err
	}
	m := views.CaseECGModel{CaseID: c.ID, CanAdd: followup.StepRecording.By(role(r)), Closed: acceptsRecordings(c.State), Errors: errs,
		MaxBytes: humanBytes(ecg.MaxFileBytes), MaxSeconds: ecg.MaxRecordingSeconds, MinRateHz: int(ecg.MinRateHz), MaxRateHz: int(ecg.MaxRateHz),
		Values: map[string]string{"auto": string(overread.AutoNoReading), "received_on": now.Format("2006-01-02")}}
	if r.MultipartForm != nil {
		// A refused upload: show what was entered (a browser never refills a file field).
		for _, k := range []string{"auto", "taken_at", "duration_s", "rate_hz", "received_on"} {
			if v := r.MultipartForm.Value[k]; len(v) > 0 {
				m.Values[k] = v[0]
			}
		}
	}
	for _, a := range overread.Autos() {
		m.Autos = append(m.Autos, views.Option{Value: string(a), Label: a.Label()})
	}
	for _, rec := range recs {
		verdict, tone := verdictView(rec)
		m.Recordings = append(m.Recordings, views.RecordingLinkView{Href: fmt.Sprintf("/recordings/%d", rec.ID),
			Taken: cohort.TimeLabel(rec.TakenAt, now.Location()), Duration: seconds(rec.DurationS), TooShort: rec.TooShort,
			Auto: rec.Auto.Label(), Waveform: rec.HasWaveform(), Verdict: verdict, VerdictTone: tone})
	}
	return views.CaseECG(m), nil
}

// recordingInput reads the intake form into typed values: times in the
// study's zone, numbers, the recorder's own reading, and the optional file.
// What the values may be is intake's rule (ecg.Intake).
func (s *Server) recordingInput(r *http.Request, loc *time.Location) (ecg.RecordingInput, error) {
	var in ecg.RecordingInput
	var ve cohort.ValidationError
	f := r.MultipartForm.Value
	val := func(k string) string {
		if v := f[k]; len(v) > 0 {
			return strings.TrimSpace(v[0])
		}
		return ""
	}
	in.Auto = overread.Auto(val("auto"))
	if v := val("taken_at"); v != "" {
		t, err := time.ParseInLocation("2006-01-02T15:04", v, loc)
		if err != nil {
			ve.Add("taken_at", "enter the time as YYYY-MM-DD HH:MM")
		}
		in.TakenAt = t
	}
	if v := val("received_on"); v != "" {
		d, err := cohort.ParseDate(v)
		switch {
		case err != nil:
			ve.Add("received_on", "enter the date as YYYY-MM-DD")
		case d != cohort.DateOf(s.now().In(loc)):
			// A past day: noon of that day keeps the right day in every
			// zone; today is now, which the store takes for a zero time.
			in.ReceivedAt = time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, loc)
		}
	}
	if v := val("duration_s"); v != "" {
		d, err := strconv.ParseFloat(v, 64)
		if err != nil {
			ve.Add("duration_s", "enter the duration as a number of seconds")
		}
		in.DurationS = d
	}
	if v := val("rate_hz"); v != "" {
		hz, err := strconv.ParseFloat(v, 64)
		if err != nil || !(hz > 0) {
			ve.Add("rate_hz", "enter the sampling rate as a number of samples per second")
		}
		in.CSVRateHz = hz
	}
	// One file, or a WFDB record's header and signal files together. A file
	// over ecg.MaxFileBytes (up to the 1 MiB of slack the body limit allows)
	// is refused by intake with the other problems.
	for _, fh := range r.MultipartForm.File["waveform"] {
		if fh.Size == 0 {
			continue
		}
		file, err := fh.Open()
		if err != nil {
			return in, err
		}
		data, err := io.ReadAll(file)
		file.Close()
		if err != nil {
			return in, err
		}
		if in.File == nil {
			in.File, in.FileName = data, fh.Filename
			continue
		}
		in.More = append(in.More, ecg.File{Name: fh.Filename, Data: data})
	}
	return in, ve.Err()
}

// caseRecordingAdd stores a recording from the case page's form. A refusal
// shows the case page again with the reasons beside the fields; nothing is
// stored.
func (s *Server) caseRecordingAdd(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	if _, err := s.store.Case(r.Context(), id); err != nil {
		return err
	}
	r.Body = http.MaxBytesReader(w, r.Body, ecg.MaxFileBytes+1<<20)
	err = r.ParseMultipartForm(recordingMemory)
	if err == nil {
		defer r.MultipartForm.RemoveAll()
		var st db.StudySettings
		if st, err = s.store.StudySettings(r.Context()); err != nil {
			return err
		}
		var in ecg.RecordingInput
		if in, err = s.recordingInput(r, st.Location()); err == nil {
			var rec db.Recording
			if rec, err = s.store.AddRecording(r.Context(), s.actor(r), id, in); err == nil {
				http.Redirect(w, r, fmt.Sprintf("/recordings/%d?done=added", rec.ID), http.StatusSeeOther)
				return nil
			}
		}
	} else {
		var mbe *http.MaxBytesError
		if errors.As(err, &mbe) {
			return uploadErr(err)
		}
		err = &cohort.ValidationError{Fields: map[string]string{"waveform": "send the form as a multipart upload"}}
	}
	f, ok := refused(r, err, nil)
	if !ok {
		return err
	}
	c, err := s.store.Case(r.Context(), id)
	if err != nil {
		return err
	}
	return s.renderCase(w, r, c, f.Status, f.Fields, "The recording was not stored: "+f.Message)
}

// recordingShow is a recording's page.
func (s *Server) recordingShow(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	rec, err := s.store.Recording(r.Context(), id)
	if err != nil {
		return err
	}
	return s.renderRecording(w, r, rec, http.StatusOK, nil, "")
}

var recordingDone = map[string]string{
	"added":      "Recording stored.",
	"read":       "Reading entered.",
	"read-next":  "Reading entered. This is the next recording waiting for an over-read.",
	"revised":    "Correction saved. The earlier reading is kept below.",
	"not-needed": "Marked as needing no over-read: the recording has left the over-read list.",
	"lead":       "Lead changed: the strip, the beats and the hint are now those of this lead.",
}

func (s *Server) renderRecording(w http.ResponseWriter, r *http.Request, rec db.Recording, status int, errs map[string]string, msg string) error {
	ctx := r.Context()
	st, err := s.store.StudySettings(ctx)
	if err != nil {
		return err
	}
	loc := st.Location()
	now := s.now().In(loc)
	when := func(t time.Time) string { return cohort.TimeLabel(t, loc) }
	verdict, tone := verdictView(rec)
	m := views.RecordingModel{Page: s.page(r, "Recording "+rec.StudyID, "confirmations"), ID: rec.ID, StudyID: rec.StudyID,
		CaseHref: fmt.Sprintf("/cases/%d", rec.CaseID), ParticipantHref: fmt.Sprintf("/participants/%d", rec.ParticipantID),
		TooShort: rec.TooShort, Hint: rec.Hint.Text, Warnings: rec.Hint.Warnings, Verdict: verdict, VerdictTone: tone,
		Disagreement: rec.Conclusion.Status == overread.Disagreed, Errors: errs, Message: msg}
	if msg == "" {
		m.Flash = recordingDone[r.URL.Query().Get("done")]
	}
	duration := seconds(rec.DurationS)
	if rec.TooShort && rec.UsableS >= rec.DurationS {
		duration += " (too short for a diagnostic read)"
	}
	m.Facts = []views.FactView{
		{Label: "Site", Value: rec.SiteCode},
		{Label: "Case state", Value: rec.CaseState.Label()},
		{Label: "Taken", Value: when(rec.TakenAt), Testid: "recording-taken"},
		{Label: "Received", Value: dayOf(rec.ReceivedAt, loc)},
		{Label: "Duration", Value: duration, Testid: "recording-duration"},
		{Label: overread.AutoHeading, Value: rec.Auto.Label(), Testid: "recording-auto"},
		{Label: "Readings", Value: rec.Conclusion.Status.Label()},
	}
	if rec.HasWaveform() {
		m.Facts = append(m.Facts,
			views.FactView{Label: "Waveform", Value: strings.ToUpper(rec.Format) + ", " + strconv.FormatFloat(rec.RateHz, 'f', -1, 64) + " Hz", Testid: "recording-format"},
			views.FactView{Label: "Lead", Value: rec.LeadLabel, Testid: "recording-lead"})
		if q := rec.Hint.Quality; q != nil {
			usable := q.Text(rec.RateHz)
			if rec.TooShort {
				usable += "; " + views.TooShortMark
			}
			m.Facts = append(m.Facts, views.FactView{Label: "Usable signal", Value: usable, Testid: "recording-usable"})
		}
		beats := fmt.Sprintf("%d (mean heart rate %.0f bpm)", rec.Hint.Beats, rec.Hint.MeanHR)
		if n := len(rec.Hint.Premature); n > 0 {
			beats += fmt.Sprintf(", %d premature (marked P on the strip)", n)
		}
		m.Facts = append(m.Facts, views.FactView{Label: "Beats detected", Value: beats, Testid: "recording-beats"})
		if rec.FileName != "" {
			m.Facts = append(m.Facts, views.FactView{Label: "File", Value: rec.FileName})
		}
		if rec.SHA256 != "" {
			m.Facts = append(m.Facts, views.FactView{Label: "SHA-256", Value: rec.SHA256[:16] + "…"})
		}
	} else if m.Hint == "" {
		m.Hint = "No waveform: no beat analysis."
	}
	m.Facts = append(m.Facts, views.FactView{Label: "Entered by", Value: rec.CreatedBy + ", " + when(rec.CreatedAt)})
	if rec.HasWaveform() {
		wf, err := s.store.RecordingWaveform(ctx, rec.ID)
		if err != nil {
			return err
		}
		caption := fmt.Sprintf("25 mm/s · 10 mm/mV · %s · lead %s · %d beats detected (ticks above the trace)", seconds(rec.DurationS), rec.LeadLabel, len(rec.Beats))
		if n := len(rec.Hint.Premature); n > 0 {
			caption += fmt.Sprintf(", %d premature (P)", n)
		}
		if q := rec.Hint.Quality; q != nil && len(q.Stretches) > 0 {
			caption += " · hatched: left out of beat detection and the hint (" + q.Text(rec.RateHz) + ")"
		}
		l := ecg.Mark(ecg.Layout(wf, rec.Beats, ecg.StripOptions{}), wf.RateHz, rec.Hint.Quality, rec.Beats, rec.Hint.Premature)
		m.HasStrip, m.Strip = true, stripView(fmt.Sprintf("rec%d", rec.ID), l, caption)
		m.Signals, m.LeadForm, m.LeadNote = signalsView(rec, len(rec.Readings) > 0, caseWork.allows(role(r)))
		m.Strip.Tools = true
		m.Page.Scripts = append(m.Page.Scripts, assets.URL("js/strip.js"))
	}
	m.Readings = readingViews(rec)
	u, _ := userFrom(ctx)
	next := overread.Next(readingsOf(rec))
	switch {
	case !clinical.allows(role(r)):
		m.FormNote = "Over-reads are entered by investigators."
	case next == "":
		m.FormNote = "This recording's readings are complete."
	case next == overread.Second && rec.Readings[0].ReaderID == u.ID:
		m.FormNote = "You gave the first reading. A second reading, if the study wants one, comes from another investigator."
	default:
		f := &views.OverReadFormView{Role: string(next), Today: now.Format("2006-01-02"), Reader: u.Name, MaxComment: overread.MaxCommentChars}
		if r.PostForm.Get("role") == string(next) {
			// A refused entry: show it again.
			f.Rhythm, f.Comment = r.PostForm.Get("rhythm"), r.PostForm.Get("comment")
			if v := r.PostForm.Get("confidence"); v != "" {
				f.Confidence = v
			}
			if v := r.PostForm.Get("read_on"); v != "" {
				f.Today = v
			}
		}
		switch next {
		case overread.First:
			f.Title, f.Intro = "Over-read", "Your reading is the recording's verdict unless a second reader disagrees."
		case overread.Second:
			f.Title, f.Intro, f.Blind = "Second reading (optional)", "An independent second reading: enter yours before opening the first one. If the rhythms differ, the recording waits for an adjudication.", true
		case overread.Adjudication:
			f.Title, f.Intro = "Adjudication", "The two readers disagree. Your entry settles the recording's verdict."
		}
		for _, rh := range overread.Rhythms() {
			f.Rhythms = append(f.Rhythms, views.Option{Value: string(rh), Label: rh.Label()})
		}
		for _, c := range overread.Confidences() {
			f.Confidences = append(f.Confidences, views.Option{Value: string(c), Label: c.Label()})
		}
		m.Form = f
	}
	if err := s.overReadTools(r, rec, &m); err != nil {
		return err
	}
	s.render(w, r, status, views.RecordingPage(m))
	return nil
}

func readingsOf(rec db.Recording) []overread.Reading {
	out := make([]overread.Reading, len(rec.Readings))
	for i, o := range rec.Readings {
		out[i] = o.Reading
	}
	return out
}

// readingViews lists the readings; when two readers differ, their rhythm
// cells are marked, and differing confidence of agreeing readers is marked
// more softly.
func readingViews(rec db.Recording) []views.ReadingView {
	var first, second *db.OverRead
	for i := range rec.Readings {
		switch rec.Readings[i].Role {
		case overread.First:
			first = &rec.Readings[i]
		case overread.Second:
			second = &rec.Readings[i]
		}
	}
	differ := first != nil && second != nil && first.Rhythm != second.Rhythm
	var out []views.ReadingView
	for _, o := range rec.Readings {
		v := views.ReadingView{Role: o.Role.Label(), Rhythm: o.Rhythm.Label(), Confidence: o.Confidence.Label(), Reader: o.Reader,
			On: o.On.Label(), Comment: o.Comment}
		if o.Role != overread.Adjudication {
			v.RhythmDiffers = differ
			v.ConfidenceDiffers = rec.Conclusion.ConfidenceDiffers
		} else if first != nil && second != nil && (o.ReaderID == first.ReaderID || o.ReaderID == second.ReaderID) {
			v.Note = "by one of the two readers"
		}
		if o.CreatedBy != "" && o.CreatedBy != o.Reader {
			v.Note = strings.TrimPrefix(v.Note+"; entered by "+o.CreatedBy, "; ")
		}
		out = append(out, v)
	}
	return out
}

// recordingOverRead enters a reading by the signed-in investigator.
func (s *Server) recordingOverRead(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	u, _ := userFrom(r.Context())
	// The lists' values are taken as they come; whether they are ones the
	// lists offer is overread's rule (overread.Entry.Settle).
	field := func(k string) string { return strings.TrimSpace(r.PostForm.Get(k)) }
	in := db.OverReadInput{Role: overread.Role(field("role")), Rhythm: overread.Rhythm(field("rhythm")),
		Confidence: overread.Confidence(field("confidence")), Comment: r.PostForm.Get("comment"), ReaderID: u.ID}
	var ve cohort.ValidationError
	if v := strings.TrimSpace(r.PostForm.Get("read_on")); v != "" {
		d, err := cohort.ParseDate(v)
		if err != nil {
			ve.Add("read_on", "enter the date as YYYY-MM-DD")
		}
		in.ReadOn = d
	}
	err = ve.Err()
	if err == nil {
		_, err = s.store.AddOverRead(r.Context(), s.actor(r), id, in)
	}
	if err == nil {
		return s.afterReading(w, r, id)
	}
	return s.refuseOnRecording(w, r, id, err, "The reading was not entered: ", nil)
}

// refuseOnRecording shows the recording page again with why a form on it
// was refused (the fields renamed to the form's where they differ); an
// error that is no refusal is returned as it is.
func (s *Server) refuseOnRecording(w http.ResponseWriter, r *http.Request, id int64, err error, lead string, rename map[string]string) error {
	f, ok := refused(r, err, nil)
	if !ok {
		return err
	}
	f = f.renamed(rename)
	rec, lerr := s.store.Recording(r.Context(), id)
	if lerr != nil {
		return lerr
	}
	return s.renderRecording(w, r, rec, f.Status, f.Fields, lead+f.Message)
}

// signalsView lists the signals of a recording's file and, when it held
// several ECG leads, offers the choice of lead to those who may make it,
// while no reading has been made on the lead shown.
func signalsView(rec db.Recording, read, mayChoose bool) ([]views.SignalView, *views.LeadFormView, string) {
	shown := 0
	for _, l := range rec.Leads {
		if l.Index == rec.Lead {
			shown = l.Signal
		}
	}
	var sigs []views.SignalView
	for _, s := range rec.Signals {
		if shown == 0 && (s.Kind == ecg.KindECG || s.Kind == ecg.KindUnlabelled) {
			shown = s.Number
		}
		unit := s.Unit
		if unit == "" {
			unit = "no unit"
		}
		sigs = append(sigs, views.SignalView{Number: s.Number, Label: s.Label, Unit: unit,
			Rate: strconv.FormatFloat(s.RateHz, 'f', -1, 64) + " Hz", Kind: s.Kind.Label(), Shown: s.Number == shown})
	}
	if len(rec.Leads) < 2 {
		return sigs, nil, ""
	}
	if read {
		return sigs, nil, "The lead can no longer change: a reading was made on lead " + rec.LeadLabel + "."
	}
	if !mayChoose {
		return sigs, nil, ""
	}
	f := &views.LeadFormView{Action: fmt.Sprintf("/recordings/%d/lead", rec.ID)}
	for _, l := range rec.Leads {
		label := fmt.Sprintf("%s: %d beats, %s usable", l.Label, l.Beats, seconds(l.UsableS))
		f.Leads = append(f.Leads, views.Option{Value: strconv.Itoa(l.Index), Label: label})
		if l.Index == rec.Lead {
			f.Current = strconv.Itoa(l.Index)
		}
	}
	return sigs, f, ""
}

// recordingLead makes another ECG lead of the recording's file the one
// shown and scored; the store keeps the choice and audits it.
func (s *Server) recordingLead(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	lead, perr := strconv.Atoi(strings.TrimSpace(r.PostForm.Get("lead")))
	if perr != nil || lead < 0 {
		err = &cohort.ValidationError{Fields: map[string]string{"lead": "choose one of the recording's leads"}}
	} else {
		_, err = s.store.ChooseRecordingLead(r.Context(), s.actor(r), id, lead)
	}
	if err == nil {
		http.Redirect(w, r, fmt.Sprintf("/recordings/%d?done=lead", id), http.StatusSeeOther)
		return nil
	}
	return s.refuseOnRecording(w, r, id, err, "The lead was not changed: ", nil)
}

package web

import (
	"context"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"mime/multipart"
	"net/http"
	"strconv"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"
)

type importStore interface {
	ImportReadings(ctx context.Context, a cohort.Actor, r io.Reader, o db.ImportOptions) (db.ImportReport, error)
	BeginImport(ctx context.Context, a cohort.Actor, kind, fileName string) (int64, error)
	ReceivingImport(ctx context.Context, id, bytes int64) error
	FailImport(ctx context.Context, id int64, message string) error
	Import(ctx context.Context, id int64) (db.ImportReport, error)
	Imports(ctx context.Context, limit int) ([]db.ImportReport, error)
	EachReject(ctx context.Context, importID int64, fn func(db.Reject) error) error
}

// maxUploadBytes bounds one upload; uploads are spooled to the temporary
// folder and imports stream, so this guards disk rather than memory.
const maxUploadBytes = 8 << 30

// statusTone is the badge tone of an import's or a background job's status,
// for every page that lists them.
func statusTone(status string) string {
	switch status {
	case "done":
		return "ok"
	case "running":
		return "info"
	case "failed", "interrupted":
		return "alarm"
	}
	return "neutral"
}

// importOutcome words an import's status for its badge: a file read to the
// end is "done" only when something came of it; one whose rows were all
// refused stored nothing and says so in a warning colour, and one with some
// rows refused says that too.
func importOutcome(status string, accepted, rejected, duplicates int64) (string, components.Tone) {
	if status != "done" {
		return status, components.Tone(statusTone(status))
	}
	switch {
	case accepted == 0 && rejected > 0:
		return "nothing stored: every row refused", components.Warn
	case rejected > 0:
		return "done, " + cohort.Plural(int(rejected), "row") + " refused", components.Warn
	case accepted == 0 && duplicates > 0:
		return "done, nothing new", components.Info
	case accepted == 0:
		return "done, nothing stored", components.Warn
	}
	return "done", components.OK
}

func kindLabel(kind string) string {
	switch kind {
	case db.ImportReadingsCSV:
		return "readings CSV"
	case db.ImportFHIRBundle:
		return "FHIR Bundle"
	case db.ImportVerdictsCSV:
		return "external verdicts CSV"
	}
	return kind
}

func (s *Server) importsList(w http.ResponseWriter, r *http.Request) error {
	reps, err := s.store.Imports(r.Context(), 200)
	if err != nil {
		return err
	}
	m := views.ImportsModel{Page: s.page(r, "Imports", "participants")}
	loc := s.studyZone(r.Context())
	for _, rep := range reps {
		status, tone := importOutcome(rep.Status, rep.Accepted, rep.Rejected, rep.Duplicates)
		m.Rows = append(m.Rows, views.ImportRow{ID: rep.ID, File: rep.FileName, Kind: kindLabel(rep.Kind), Status: status, Tone: string(tone),
			Started: when(rep.StartedAt, loc), Actor: rep.Actor, Accepted: rep.Accepted, Rejected: rep.Rejected, Duplicate: rep.Duplicates})
	}
	return s.ok(w, r, views.Imports(m))
}

func (s *Server) importNew(w http.ResponseWriter, r *http.Request) error {
	return s.ok(w, r, views.ImportForm(views.ImportFormModel{Page: s.page(r, "Import wear data", "participants"), MaxBytes: humanBytes(maxUploadBytes)}))
}

// importCreate receives the uploaded file whole (spooled to a temporary
// file, never held in memory, with no database transaction open while it
// arrives), then imports it. The import is on the list from the first byte,
// with the bytes received so far.
func (s *Server) importCreate(w http.ResponseWriter, r *http.Request) error {
	u, _ := userFrom(r.Context())
	release, ok := s.uploads.take(u.ID)
	if !ok {
		return errTooManyUploads
	}
	defer release()
	r.Body = http.MaxBytesReader(w, r.Body, maxUploadBytes)
	mr, err := r.MultipartReader()
	if err != nil {
		return &cohort.ValidationError{Fields: map[string]string{"file": "send the file as a multipart form upload"}}
	}
	kind := db.ImportReadingsCSV
	for {
		part, err := mr.NextPart()
		if err == io.EOF {
			break
		}
		if err != nil {
			return uploadErr(err)
		}
		switch part.FormName() {
		case "kind":
			b, _ := io.ReadAll(io.LimitReader(part, 64))
			kind = string(b)
		case "file":
			return s.importPart(w, r, part, kind)
		}
		part.Close()
	}
	return s.renderImportForm(w, r, fieldError("file", "Choose a file to import."))
}

// renderImportForm shows the import form again after a refusal (see refused).
func (s *Server) renderImportForm(w http.ResponseWriter, r *http.Request, err error) error {
	f, ok := refused(r, err, nil)
	if !ok {
		return err
	}
	s.render(w, r, f.Status, views.ImportForm(views.ImportFormModel{Page: s.page(r, "Import wear data", "participants"), MaxBytes: humanBytes(maxUploadBytes), Error: f.Message}))
	return nil
}

func (s *Server) importPart(w http.ResponseWriter, r *http.Request, part *multipart.Part, kind string) error {
	defer part.Close()
	if kind != db.ImportReadingsCSV && kind != db.ImportFHIRBundle {
		return s.renderImportForm(w, r, fieldError("kind", "Choose the file's format."))
	}
	name := part.FileName()
	if name == "" {
		return s.renderImportForm(w, r, fieldError("file", "Choose a file to import."))
	}
	ctx := r.Context()
	id, err := s.store.BeginImport(ctx, s.actor(r), kind, name)
	if err != nil {
		return err
	}
	f, size, err := spool(ctx, part, func(n int64) { _ = s.store.ReceivingImport(context.WithoutCancel(ctx), id, n) })
	if err != nil {
		msg := "the upload did not arrive whole; nothing from this file was stored - send it again"
		var mbe *http.MaxBytesError
		if errors.As(err, &mbe) {
			msg = fmt.Sprintf("the file is larger than %s; nothing was stored - split it into several files", humanBytes(mbe.Limit))
		}
		_ = s.store.FailImport(context.WithoutCancel(ctx), id, msg)
		return uploadErr(err)
	}
	defer removeSpool(f)
	rep, err := s.store.ImportReadings(ctx, s.actor(r), f, db.ImportOptions{Kind: kind, FileName: name, Size: size, ID: id})
	if err != nil && errors.Is(err, db.ErrUnavailable) {
		return err // nothing was stored; the failed import is on the list
	}
	http.Redirect(w, r, fmt.Sprintf("/imports/%d", rep.ID), http.StatusSeeOther)
	return nil
}

func (s *Server) importParam(r *http.Request) (db.ImportReport, error) {
	id, err := idParam(r)
	if err != nil {
		return db.ImportReport{}, err
	}
	return s.store.Import(r.Context(), id)
}

func (s *Server) importShow(w http.ResponseWriter, r *http.Request) error {
	rep, err := s.importParam(r)
	if err != nil {
		return err
	}
	loc := s.studyZone(r.Context())
	status, tone := importOutcome(rep.Status, rep.Accepted, rep.Rejected, rep.Duplicates)
	m := views.ImportReportModel{Page: s.page(r, "Import "+rep.FileName, "participants"), ID: rep.ID, File: rep.FileName, Kind: kindLabel(rep.Kind),
		Status: status, Tone: string(tone), Message: rep.Message, SHA256: rep.SHA256, Size: humanBytes(max(rep.Size, rep.BytesRead)),
		Started: when(rep.StartedAt, loc), Actor: rep.Actor, Rows: rep.Rows, Accepted: rep.Accepted,
		Rejected: rep.Rejected, Duplicates: rep.Duplicates, Rejects: fmt.Sprintf("/imports/%d/rejects.csv", rep.ID)}
	if rep.FinishedAt != nil {
		m.Finished = when(*rep.FinishedAt, loc)
	}
	if rep.Status == "done" && rep.Accepted == 0 && rep.Duplicates > 0 {
		m.SameAs = "Every reading in this file was already stored: nothing changed."
	}
	for _, rc := range rep.Reasons {
		v := views.ReasonView{Code: rc.Code, Label: db.ReasonLabel(rc.Code), Count: rc.Count}
		for _, e := range rc.Examples {
			v.Examples = append(v.Examples, fmt.Sprintf("line %d: %s", e.Line, e.Message))
		}
		m.Reasons = append(m.Reasons, v)
	}
	return s.ok(w, r, views.ImportReport(m))
}

// importRejects downloads the quarantined rows with their line and reason, so
// they can be corrected and sent again.
func (s *Server) importRejects(w http.ResponseWriter, r *http.Request) error {
	rep, err := s.importParam(r)
	if err != nil {
		return err
	}
	if err := s.store.Audit(r.Context(), s.actor(r), "import.rejects_download", "import", strconv.FormatInt(rep.ID, 10), nil, nil); err != nil {
		return err
	}
	w.Header().Set("Content-Type", "text/csv; charset=utf-8")
	w.Header().Set("Content-Disposition", fmt.Sprintf(`attachment; filename="import-%d-refused.csv"`, rep.ID))
	cw := csv.NewWriter(w)
	_ = cw.Write([]string{"line", "entry", "reason", "message", "row"})
	err = s.store.EachReject(r.Context(), rep.ID, func(rj db.Reject) error {
		entry := ""
		if rj.Entry != nil {
			entry = strconv.Itoa(int(*rj.Entry))
		}
		return cw.Write([]string{strconv.FormatInt(rj.Line, 10), entry, rj.Reason, rj.Message, csvSafe(rj.Raw)})
	})
	cw.Flush()
	return err
}

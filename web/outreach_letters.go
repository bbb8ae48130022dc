package web

import (
	"fmt"
	"net/http"
	"net/url"
	"strconv"
	"strings"

	"cohortdesk/cohort/outreach"
	"cohortdesk/views"
	"cohortdesk/views/letterpdf"
)

// Letters: the selected cases' letters are printed as one batch (one PDF,
// one letter per page, for window envelopes) and recorded as posted once,
// from the batch's page, which logs exactly the letters printed.

// firstValue is the first non-empty value of the named form fields.
func firstValue(v url.Values, names ...string) string {
	for _, n := range names {
		if s := strings.TrimSpace(v.Get(n)); s != "" {
			return s
		}
	}
	return ""
}

// casesBulkLetters prints the letters of the ticked cases (or of one case,
// from its page) as a batch and opens the batch's page.
func (s *Server) casesBulkLetters(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	back, err := url.Parse(safeBack(r.PostForm.Get("back"), "/cases"))
	if err != nil {
		back = &url.URL{Path: "/cases"}
	}
	refs, err := caseRefs(r.PostForm["case"])
	var batch int64
	if err == nil {
		p := outreach.Purpose(firstValue(r.PostForm, "letter-purpose", "bulk-purpose"))
		paper := outreach.PaperNamed(firstValue(r.PostForm, "letter-paper", "bulk-paper"))
		batch, _, err = s.store.PrintLetters(r.Context(), s.actor(r), refs, p, paper)
	}
	if err != nil {
		f, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		if id, perr := strconv.ParseInt(strings.TrimPrefix(back.Path, "/cases/"), 10, 64); perr == nil {
			c, lerr := s.store.Case(r.Context(), id)
			if lerr != nil {
				return lerr
			}
			return s.renderCase(w, r, c, f.Status, nil, f.Message)
		}
		return s.renderCases(w, r, back.Query(), f.Status, f.Message)
	}
	http.Redirect(w, r, fmt.Sprintf("/letters/%d", batch), http.StatusSeeOther)
	return nil
}

// letterBatchShow is a batch's page: its PDF, its cases, the button that
// records the letters as posted (or who did and when).
func (s *Server) letterBatchShow(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	return s.renderBatch(w, r, id, http.StatusOK, "")
}

func (s *Server) renderBatch(w http.ResponseWriter, r *http.Request, id int64, status int, msg string) error {
	b, err := s.store.LetterBatch(r.Context(), id)
	if err != nil {
		return err
	}
	st, err := s.store.StudySettings(r.Context())
	if err != nil {
		return err
	}
	loc := st.Location()
	m := views.LetterBatchModel{Page: s.page(r, fmt.Sprintf("Letters, batch %d", id), "cases"), ID: id, Template: b.Template.Label(),
		Paper: "A4", Created: b.CreatedBy + " on " + when(b.CreatedAt, loc),
		Skipped: b.Skipped, PDFHref: fmt.Sprintf("/letters/%d/pdf", id), Message: msg}
	if b.Paper == outreach.PaperLetter.Name {
		m.Paper = "US Letter"
	}
	if !b.PostedAt.IsZero() {
		m.Posted = b.PostedBy + " on " + when(b.PostedAt, loc)
	}
	for _, c := range b.Cases {
		m.Cases = append(m.Cases, views.Option{Value: fmt.Sprintf("/cases/%d", c.CaseID), Label: c.StudyID})
	}
	if msg == "" {
		m.Page.Flash = doneMessages[r.URL.Query().Get("done")]
	}
	s.render(w, r, status, views.LetterBatch(m))
	return nil
}

// letterBatchPDF is the batch's letters as one PDF, drawn again from the
// letters kept when it was printed (the same bytes every time). Reading the
// letters is a view of each participant's details, audited.
func (s *Server) letterBatchPDF(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	b, err := s.store.LetterBatch(r.Context(), id)
	if err != nil {
		return err
	}
	letters, err := s.store.LetterBatchLetters(r.Context(), s.actor(r), id)
	if err != nil {
		return err
	}
	st, err := s.store.StudySettings(r.Context())
	if err != nil {
		return err
	}
	var ls []letterpdf.Letter
	for _, l := range letters {
		ls = append(ls, letterpdf.Letter{Address: l.Address, Reference: l.StudyID, Subject: l.Subject, Body: l.Body})
	}
	day := outreach.WrittenDay(st.Calendar().DateOf(b.CreatedAt))
	pdf, err := letterpdf.Render(ls, letterpdf.Sender{Study: st.Name, Contact: st.ContactRoute}, outreach.PaperNamed(b.Paper), day, b.CreatedAt)
	if err != nil {
		return err
	}
	w.Header().Set("Content-Type", "application/pdf")
	w.Header().Set("Content-Disposition", fmt.Sprintf(`inline; filename="letters-%d.pdf"`, id))
	w.Header().Set("Cache-Control", "no-store")
	_, err = w.Write(pdf)
	return err
}

// letterBatchPosted records the batch's letters as posted, once; a second
// time is refused with who recorded them and when.
func (s *Server) letterBatchPosted(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	if _, err := s.store.PostLetters(r.Context(), s.actor(r), id); err != nil {
		f, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		return s.renderBatch(w, r, id, f.Status, f.Message)
	}
	http.Redirect(w, r, fmt.Sprintf("/letters/%d?done=posted", id), http.StatusSeeOther)
	return nil
}

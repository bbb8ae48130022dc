package web

import (
	"archive/zip"
	"context"
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"hash"
	"io"
	"net/http"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/db"
	"cohortdesk/views"
)

// exportStore is what the exports area and the dataset export need.
type exportStore interface {
	Exports(ctx context.Context, limit int) ([]db.Export, error)
	EachExportParticipant(ctx context.Context, fn func(deid.ParticipantRecord) error) error
	EachExportWeek(ctx context.Context, fn func(deid.WeekRecord) error) error
	EachExportScreen(ctx context.Context, fn func(deid.ScreenRecord) error) error
	EachExportCase(ctx context.Context, fn func(deid.CaseRecord) error) error
	EachExportOverRead(ctx context.Context, fn func(deid.OverReadRecord) error) error
}

// exportsPage is the exports area.
func (s *Server) exportsPage(w http.ResponseWriter, r *http.Request) error {
	return s.renderExports(w, r, http.StatusOK, nil, "", "")
}

// renderExports shows the exports area with an optional refusal message.
func (s *Server) renderExports(w http.ResponseWriter, r *http.Request, status int, errs map[string]string, msg, studyID string) error {
	ctx := r.Context()
	rl := role(r)
	m := views.ExportsModel{Page: s.page(r, "Exports", "exports"), ReviewCaution: deid.ReviewCaution,
		CanReferrals: referrals.allows(rl), CanDataset: deidExport.allows(rl), Message: msg, Errors: errs, StudyID: studyID, Paper: s.studyPaper(ctx)}
	if m.CanReferrals {
		ready, err := s.store.ReadyToRefer(ctx)
		if err != nil {
			return err
		}
		for _, c := range ready {
			weeks := strconv.Itoa(c.FirstWeek)
			if c.LastWeek != c.FirstWeek {
				weeks += "–" + strconv.Itoa(c.LastWeek)
			}
			m.Ready = append(m.Ready, views.ReadyRowView{StudyID: c.StudyID, CaseHref: fmt.Sprintf("/cases/%d", c.CaseID), State: c.State.Label(),
				Weeks: weeks, SummaryHref: fmt.Sprintf("/participants/%d/referral?case=%d", c.ParticipantID, c.CaseID)})
		}
	}
	exports, err := s.store.Exports(ctx, 50)
	if err != nil {
		return err
	}
	loc := s.studyZone(ctx)
	for _, e := range exports {
		m.Exports = append(m.Exports, exportRow(e, loc))
	}
	refs, err := s.store.Referrals(ctx, 100)
	if err != nil {
		return err
	}
	if m.Issued, m.Signed, err = s.store.ReferralCounts(ctx); err != nil {
		return err
	}
	for _, f := range refs {
		row := views.ReferralRowView{ID: f.ID, Code: f.Code, StudyID: f.StudyID, Issued: when(f.IssuedAt, loc),
			By: f.IssuedBy, Format: f.Format + ", " + paperLabel(f.Paper), Digest: f.ContentSHA256[:16] + "…"}
		if m.CanReferrals {
			row.Href = fmt.Sprintf("/referrals/%d", f.ID)
		}
		if f.CaseID != 0 && caseWork.allows(rl) {
			row.CaseHref = fmt.Sprintf("/cases/%d", f.CaseID)
		}
		if !f.SignedOffAt.IsZero() {
			row.SignedOff = f.SignedOffBy + ", " + when(f.SignedOffAt, loc)
		}
		m.Referrals = append(m.Referrals, row)
	}
	for _, id := range deid.Identifiers() {
		m.Identifiers = append(m.Identifiers, views.IdentifierView{Number: id.Number, Name: id.Name, Treatment: string(id.Treatment), How: id.How})
	}
	s.render(w, r, status, views.Exports(m))
	return nil
}

func exportRow(e db.Export, loc *time.Location) views.ExportRowView {
	kind := "de-identified dataset"
	if e.Kind == db.ExportReferralBatch {
		kind = "referral summaries (zip of PDFs)"
	}
	row := views.ExportRowView{ID: e.ID, Kind: kind, When: when(e.CreatedAt, loc), Who: e.Actor, File: e.FileName,
		Size: strconv.FormatInt((e.Bytes+1023)/1024, 10) + " kB", Digest: e.SHA256[:16] + "…"}
	var man struct {
		Files []struct {
			Name string `json:"name"`
			Rows *int   `json:"rows"`
		} `json:"files"`
		Summaries []batchEntry `json:"summaries"`
	}
	if json.Unmarshal(e.Manifest, &man) == nil {
		for _, f := range man.Files {
			if f.Rows != nil {
				row.Files = append(row.Files, fmt.Sprintf("%s: %d rows", f.Name, *f.Rows))
			}
		}
		if n := len(man.Summaries); n > 0 {
			row.Files = append(row.Files, cohort.Plural(n, "summary"))
		}
	}
	return row
}

// manifestFile is one file of the dataset export's manifest.
type manifestFile struct {
	Name   string `json:"name"`
	Rows   *int   `json:"rows,omitempty"` // data rows of a CSV, without the header
	Bytes  int64  `json:"bytes"`
	SHA256 string `json:"sha256"`
}

// datasetManifest is manifest.json of the dataset export.
type datasetManifest struct {
	Kind          string         `json:"kind"`
	FormatVersion int            `json:"format_version"`
	CreatedAt     string         `json:"created_at"`
	Files         []manifestFile `json:"files"`
	ReviewCaution string         `json:"review_caution"`
}

// countingHash is a file's digest and size as it is written.
type countingHash struct {
	h hash.Hash
	n int64
}

func (c *countingHash) Write(p []byte) (int, error) {
	c.n += int64(len(p))
	return c.h.Write(p)
}

// datasetExport writes the de-identified dataset as one zip: a CSV per table
// whose header is checked against its allow-list, the data dictionary, a
// read-me and a manifest with each file's rows and SHA-256. The export is
// recorded and audited before it is sent.
func (s *Server) datasetExport(w http.ResponseWriter, r *http.Request) error {
	secret, err := s.codeSecret()
	if err != nil {
		return err
	}
	ds, err := deid.NewDataset(secret)
	if err != nil {
		return err
	}
	ctx := r.Context()
	now := s.now().UTC()
	man := datasetManifest{Kind: "de-identified dataset", FormatVersion: 1, CreatedAt: now.Format("2006-01-02T15:04:05Z"), ReviewCaution: deid.ReviewCaution}
	buf, err := newDownloadFile()
	if err != nil {
		return err
	}
	defer buf.Close()
	zw := zip.NewWriter(buf)
	add := func(name string, write func(io.Writer) (int, error), counted bool) error {
		f, err := zw.CreateHeader(&zip.FileHeader{Name: name, Method: zip.Deflate, Modified: deid.PlaceholderDate()})
		if err != nil {
			return fmt.Errorf("web: dataset %s: %w", name, err)
		}
		ch := &countingHash{h: sha256.New()}
		rows, err := write(io.MultiWriter(f, ch))
		if err != nil {
			return fmt.Errorf("web: dataset %s: %w", name, err)
		}
		mf := manifestFile{Name: name, Bytes: ch.n, SHA256: hex.EncodeToString(ch.h.Sum(nil))}
		if counted {
			mf.Rows = &rows
		}
		man.Files = append(man.Files, mf)
		return nil
	}
	for _, t := range deid.DatasetTables() {
		t := t
		if err := add(t.File, func(out io.Writer) (int, error) { return s.writeTable(ctx, out, ds, t) }, true); err != nil {
			return err
		}
	}
	if err := add("dictionary.csv", writeDictionary, false); err != nil {
		return err
	}
	if err := add("README.txt", func(out io.Writer) (int, error) { return 0, writeReadme(out, now) }, false); err != nil {
		return err
	}
	if err := add(cohort.CautionsFile, func(out io.Writer) (int, error) { _, err := io.WriteString(out, cohort.CautionsText()); return 0, err }, false); err != nil {
		return err
	}
	mj, err := json.MarshalIndent(man, "", "  ")
	if err != nil {
		return err
	}
	if err := zipFile(zw, "manifest.json", mj); err != nil {
		return err
	}
	if err := zw.Close(); err != nil {
		return fmt.Errorf("web: dataset zip: %w", err)
	}
	name := "cohortdesk-deidentified-" + now.Format("20060102-150405") + ".zip"
	if _, err := s.store.RecordExport(ctx, s.actor(r), db.Export{Kind: db.ExportDataset, FileName: name, Bytes: buf.Size(),
		SHA256: buf.SHA256(), Manifest: mj}); err != nil {
		return err
	}
	return buf.sendZip(w, name)
}

// writeTable writes one table's CSV. The header is the table's and is
// checked against the export's allow-list; every row must have its width.
func (s *Server) writeTable(ctx context.Context, out io.Writer, ds *deid.Dataset, t deid.Table) (int, error) {
	header := t.Header()
	if err := deid.CheckFields(t.Export, header); err != nil {
		return 0, err
	}
	cw := csv.NewWriter(out)
	if err := cw.Write(header); err != nil {
		return 0, err
	}
	rows := 0
	put := func(rec []string) error {
		if len(rec) != len(header) {
			return fmt.Errorf("web: %s: row of %d values for %d columns", t.File, len(rec), len(header))
		}
		rows++
		return cw.Write(rec)
	}
	var err error
	switch t.Export {
	case deid.DatasetParticipants:
		err = s.store.EachExportParticipant(ctx, func(r deid.ParticipantRecord) error { return put(ds.Participant(r)) })
	case deid.DatasetWeeks:
		err = s.store.EachExportWeek(ctx, func(r deid.WeekRecord) error { return put(ds.Week(r)) })
	case deid.ScreeningResults:
		err = s.store.EachExportScreen(ctx, func(r deid.ScreenRecord) error { return put(ds.Screen(r)) })
	case deid.DatasetWindows:
		err = s.store.EachExportScreen(ctx, func(r deid.ScreenRecord) error {
			for _, rec := range ds.Windows(r) {
				if err := put(rec); err != nil {
					return err
				}
			}
			return nil
		})
	case deid.DatasetCases:
		err = s.store.EachExportCase(ctx, func(r deid.CaseRecord) error { return put(ds.Case(r)) })
	case deid.DatasetOverReads:
		err = s.store.EachExportOverRead(ctx, func(r deid.OverReadRecord) error { return put(ds.OverRead(r)) })
	default:
		err = fmt.Errorf("web: dataset table %s has no reader", t.Export)
	}
	if err != nil {
		return rows, err
	}
	cw.Flush()
	return rows, cw.Error()
}

// writeDictionary writes dictionary.csv from the de-identification rules.
func writeDictionary(out io.Writer) (int, error) {
	cw := csv.NewWriter(out)
	if err := cw.Write([]string{"file", "column", "type", "description"}); err != nil {
		return 0, err
	}
	n := 0
	for _, t := range deid.DatasetTables() {
		for _, c := range t.Columns {
			if err := cw.Write([]string{t.File, c.Name, c.Type, c.Description}); err != nil {
				return n, err
			}
			n++
		}
	}
	cw.Flush()
	return n, cw.Error()
}

// writeReadme writes README.txt: what the files are and how each Safe
// Harbor identifier was treated.
func writeReadme(out io.Writer, now time.Time) error {
	var b strings.Builder
	b.WriteString("De-identified dataset from cohortdesk\n\n")
	b.WriteString(deid.ReviewCaution + "\n\n")
	b.WriteString("Files:\n")
	for _, t := range deid.DatasetTables() {
		fmt.Fprintf(&b, "  %-24s %s\n", t.File, t.About)
	}
	b.WriteString("  dictionary.csv           every column of every file, with its type and rule\n")
	b.WriteString("  " + fmt.Sprintf("%-24s", cohort.CautionsFile) + " the screening cautions: read them before using the verdicts\n")
	b.WriteString("  manifest.json            each file's rows, size and SHA-256\n\n")
	b.WriteString("Participants appear by pseudonymous referral code, the same in every file; the key stays with the study.\n")
	b.WriteString("Screening verdicts are screens, not diagnoses; " + cohort.NegativeWeekCaution + " See " + cohort.CautionsFile + ".\n\n")
	b.WriteString("Safe Harbor identifiers (45 CFR 164.514(b)(2)(i)) and their treatment:\n")
	for _, id := range deid.Identifiers() {
		fmt.Fprintf(&b, "  %2d. %s: %s. %s\n", id.Number, id.Name, id.Treatment, id.How)
	}
	fmt.Fprintf(&b, "\nMade %s.\n", now.Format("2006-01-02 15:04 UTC"))
	_, err := io.WriteString(out, b.String())
	return err
}

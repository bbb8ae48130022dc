package web

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"hash"
	"io"
	"net/http"
	"net/url"
	"os"
	"strconv"
)

// downloadFile is a download being built in a temporary file, so a large export
// (the de-identified dataset of a large study, a batch of summaries) takes
// bounded memory whatever its size: it is written, its size and digest are
// recorded, then it is sent from the file.
type downloadFile struct {
	f *os.File
	h hash.Hash
	n int64
}

func newDownloadFile() (*downloadFile, error) {
	f, err := os.CreateTemp("", "cohortdesk-download-*")
	if err != nil {
		return nil, fmt.Errorf("web: download file: %w", err)
	}
	return &downloadFile{f: f, h: sha256.New()}, nil
}

func (s *downloadFile) Write(p []byte) (int, error) {
	n, err := s.f.Write(p)
	s.h.Write(p[:n])
	s.n += int64(n)
	return n, err
}

// SHA256 is the hex digest of what was written.
func (s *downloadFile) SHA256() string { return hex.EncodeToString(s.h.Sum(nil)) }

// Size is how many bytes were written.
func (s *downloadFile) Size() int64 { return s.n }

// sendZip sends the zip built in the file as an attachment named name.
func (s *downloadFile) sendZip(w http.ResponseWriter, name string) error {
	if _, err := s.f.Seek(0, io.SeekStart); err != nil {
		return fmt.Errorf("web: download file: %w", err)
	}
	w.Header().Set("Content-Type", "application/zip")
	w.Header().Set("Content-Disposition", `attachment; filename="`+url.PathEscape(name)+`"`)
	w.Header().Set("Content-Length", strconv.FormatInt(s.n, 10))
	w.Header().Set("Cache-Control", "no-store")
	w.Header().Set("X-Content-SHA256", s.SHA256())
	_, err := io.Copy(w, s.f)
	return err
}

// Close removes the file.
func (s *downloadFile) Close() {
	s.f.Close()
	os.Remove(s.f.Name())
}

package ecg

import (
	"archive/zip"
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"fmt"
	"io"
	"path"
	"slices"
	"strings"
)

// Limits of an upload of several files (ours): a WFDB record is a header
// and a few signal and annotation files.
const (
	maxUploadFiles = 32
)

// isZip recognises a zip archive by its local file header signature.
func isZip(b []byte) bool { return len(b) >= 4 && string(b[:4]) == "PK\x03\x04" }

// uploadFiles lists the files of an upload: File (as FileName) and More, a
// zip archive among them replaced by the files it holds. Their total size
// stays within MaxFileBytes. A refusal is a message.
func uploadFiles(in RecordingInput) ([]File, string) {
	var raw []File
	if len(in.File) > 0 {
		raw = append(raw, File{Name: strings.TrimSpace(in.FileName), Data: in.File})
	}
	raw = append(raw, in.More...)
	var out []File
	total := 0
	for _, f := range raw {
		if isZip(f.Data) {
			inner, msg := unzip(f, MaxFileBytes-total)
			if msg != "" {
				return nil, msg
			}
			for _, g := range inner {
				total += len(g.Data)
			}
			out = append(out, inner...)
			continue
		}
		total += len(f.Data)
		out = append(out, f)
	}
	if total > MaxFileBytes {
		return nil, fmt.Sprintf("the upload holds %d MiB, more than the %d MiB of any handheld recording.", total>>20, MaxFileBytes>>20)
	}
	if len(out) > maxUploadFiles {
		return nil, fmt.Sprintf("the upload holds %d files; a recording needs at most a WFDB header and its signal files (at most %d).", len(out), maxUploadFiles)
	}
	if len(out) == 0 {
		return nil, "the upload holds no file."
	}
	return out, ""
}

// unzip reads the files of a zip archive, skipping folders and the
// resource forks some archivers add, within budget bytes in all.
func unzip(f File, budget int) ([]File, string) {
	zr, err := zip.NewReader(bytes.NewReader(f.Data), int64(len(f.Data)))
	if err != nil {
		return nil, fmt.Sprintf("%s is not a readable zip file (%v).", displayName(f.Name), err)
	}
	var out []File
	for _, zf := range zr.File {
		name := path.Base(zf.Name)
		if zf.FileInfo().IsDir() || strings.HasPrefix(zf.Name, "__MACOSX/") || strings.HasPrefix(name, "._") {
			continue
		}
		if len(out) >= maxUploadFiles {
			return nil, fmt.Sprintf("%s holds more than %d files; a recording needs at most a WFDB header and its signal files.", displayName(f.Name), maxUploadFiles)
		}
		if zf.UncompressedSize64 > uint64(max(0, budget)) {
			return nil, fmt.Sprintf("%s in %s unpacks to more than the %d MiB of any handheld recording.", name, displayName(f.Name), MaxFileBytes>>20)
		}
		rc, err := zf.Open()
		if err != nil {
			return nil, fmt.Sprintf("%s in %s cannot be read (%v).", name, displayName(f.Name), err)
		}
		data, err := io.ReadAll(io.LimitReader(rc, int64(budget)+1))
		rc.Close()
		if err != nil {
			return nil, fmt.Sprintf("%s in %s cannot be read (%v).", name, displayName(f.Name), err)
		}
		if len(data) > budget {
			return nil, fmt.Sprintf("%s in %s unpacks to more than the %d MiB of any handheld recording.", name, displayName(f.Name), MaxFileBytes>>20)
		}
		budget -= len(data)
		out = append(out, File{Name: name, Data: data})
	}
	if len(out) == 0 {
		return nil, fmt.Sprintf("%s holds no file.", displayName(f.Name))
	}
	return out, ""
}

func displayName(n string) string {
	if n == "" {
		return "the zip file"
	}
	return fmt.Sprintf("%q", n)
}

// mainFile picks the file to read: the only one, or of several the WFDB
// header (named .hea, or read as one) with the others as its signal files.
// Annotation files that come along are ignored.
func mainFile(files []File) (File, []File, string) {
	if len(files) == 1 {
		return files[0], nil, ""
	}
	var headers []int
	for i, f := range files {
		if strings.EqualFold(path.Ext(f.Name), ".hea") {
			headers = append(headers, i)
		}
	}
	if len(headers) == 0 {
		for i, f := range files {
			if isWFDBHeader(f.Data) {
				headers = append(headers, i)
			}
		}
	}
	switch len(headers) {
	case 1:
		rest := slices.Delete(slices.Clone(files), headers[0], headers[0]+1)
		return files[headers[0]], rest, ""
	case 0:
		return File{}, nil, "several files are read only as a WFDB record: its header (.hea) and signal files (.dat), together or in a zip file; upload an EDF or CSV file on its own."
	}
	return File{}, nil, "the upload holds several WFDB headers; upload one record at a time."
}

// uploadDigest is the SHA-256 of the upload: of the one file as it is, or,
// of several, of each file's name, its length (8 bytes, big-endian) and its
// content, in name order, so the same record uploaded twice, loose or
// zipped, has one digest.
func uploadDigest(files []File) []byte {
	if len(files) == 1 {
		sum := sha256.Sum256(files[0].Data)
		return sum[:]
	}
	sorted := slices.Clone(files)
	slices.SortFunc(sorted, func(a, b File) int { return strings.Compare(a.Name, b.Name) })
	h := sha256.New()
	for _, f := range sorted {
		h.Write([]byte(f.Name))
		h.Write([]byte{0})
		h.Write(binary.BigEndian.AppendUint64(nil, uint64(len(f.Data))))
		h.Write(f.Data)
	}
	return h.Sum(nil)
}

package web

import (
	"archive/zip"

	"cohortdesk/cohort"
)

// zipCautions adds the cautions as a text file (cohort.CautionsFile) to an
// export or bundle and returns its manifest entry: every zip that leaves the
// app carries them.
func zipCautions(zw *zip.Writer) (manifestFile, error) {
	b := []byte(cohort.CautionsText())
	if err := zipFile(zw, cohort.CautionsFile, b); err != nil {
		return manifestFile{}, err
	}
	return manifestFile{Name: cohort.CautionsFile, Bytes: int64(len(b)), SHA256: sha256Hex(b)}, nil
}

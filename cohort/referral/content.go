package referral

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
)

// FormatVersion is the version of the Summary's JSON shape. A recorded
// summary of another version is refused rather than drawn wrongly.
const FormatVersion = 1

// ErrInvalid marks a Source or recorded content Build or Decode cannot use.
var ErrInvalid = errors.New("invalid referral summary input")

// Content is the JSON recorded for a summary: deterministic for equal
// summaries, so its digest identifies the content.
func Content(s Summary) ([]byte, error) {
	b, err := json.Marshal(s)
	if err != nil {
		return nil, fmt.Errorf("referral: content: %w", err)
	}
	return b, nil
}

// Digest is the SHA-256 of Content(s), in hex.
func Digest(s Summary) (string, error) {
	b, err := Content(s)
	if err != nil {
		return "", err
	}
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:]), nil
}

// Decode reads recorded content back. The database may store the JSON in
// another key order or spacing; decoding and re-encoding gives Content again.
func Decode(b []byte) (Summary, error) {
	var s Summary
	if err := json.Unmarshal(b, &s); err != nil {
		return Summary{}, fmt.Errorf("referral: recorded content: %w: %w", err, ErrInvalid)
	}
	if s.FormatVersion != FormatVersion {
		return Summary{}, fmt.Errorf("referral: recorded content has format version %d, this program draws %d: %w", s.FormatVersion, FormatVersion, ErrInvalid)
	}
	return s, nil
}

package db

import (
	"crypto/sha256"
	"encoding/hex"
	"strconv"
	"unicode/utf8"
)

// Staff free text (participant notes, withdrawal reasons, case working
// notes, contact-attempt notes, closing reasons, over-read comments) can hold
// anything, identifying details included, and the audit trail can never be
// changed. So an audit event does not copy the text: it keeps a textRef,
// where the text lives and a digest of it. The text itself stays in its own
// row, where it can be corrected or removed (a participant's request, a note
// written on the wrong record); the digest still shows what the text was
// when the event was written to anyone who holds the text. Events written
// before this rule keep their copies: the audit table refuses updates.

// textRef stands in an audit event for a piece of staff free text.
type textRef struct {
	In     string `json:"in"`     // table, row and column the text is kept in
	SHA256 string `json:"sha256"` // of the text's UTF-8 bytes, lower-case hex
	Chars  int    `json:"chars"`  // its length in characters
}

// freeText refers to text kept in table's row id, column col; nil for no
// text.
func freeText(table string, id int64, col, text string) *textRef {
	if text == "" {
		return nil
	}
	return &textRef{In: table + "/" + strconv.FormatInt(id, 10) + "/" + col, SHA256: textDigest(text), Chars: utf8.RuneCountInString(text)}
}

// textDigest is the digest a textRef holds.
func textDigest(text string) string {
	sum := sha256.Sum256([]byte(text))
	return hex.EncodeToString(sum[:])
}

// sameText reports whether the free text of an audit snapshot (copied by an
// event written before the rule, or referred to by a later one) is text.
func sameText(copied string, ref *textRef, text string) bool {
	if ref != nil {
		return ref.SHA256 == textDigest(text)
	}
	return copied == text
}

package wear

import (
	"bytes"
	"io"
)

// trackingReader sits between the input and the JSON decoder and keeps the
// bytes the decoder has been given but the reader has not yet passed, so the
// reader can quote an entry's raw JSON in a rejection and count lines up to
// any offset it has reached, without a second pass over the file.
type trackingReader struct {
	r       io.Reader
	pending []byte // bytes from offset base on
	head    int    // pending[head:] are the bytes still needed
	base    int64  // file offset of pending[head]
	line    int    // line number at offset base
	limit   int
	err     error
}

// Read passes data to the decoder, keeping a copy until advance drops it, and
// refuses to go on once one entry holds more than the limit.
func (t *trackingReader) Read(p []byte) (int, error) {
	if t.err != nil {
		return 0, t.err
	}
	if len(t.pending)-t.head > t.limit {
		t.err = ErrEntryTooLarge
		return 0, t.err
	}
	n, err := t.r.Read(p)
	if t.head > 0 && t.head >= len(t.pending)/2 {
		t.pending = t.pending[:copy(t.pending, t.pending[t.head:])]
		t.head = 0
	}
	t.pending = append(t.pending, p[:n]...)
	if err != nil && err != io.EOF {
		t.err = err
	}
	return n, err
}

// advance forgets the bytes before off, counting their line breaks.
func (t *trackingReader) advance(off int64) {
	k := int(off - t.base)
	if k <= 0 {
		return
	}
	if k > len(t.pending)-t.head {
		k = len(t.pending) - t.head
	}
	t.line += bytes.Count(t.pending[t.head:t.head+k], []byte{'\n'})
	t.head += k
	t.base += int64(k)
}

// entryStart skips the spaces and comma before the next value and returns
// where that value starts: byte offset and line.
func (t *trackingReader) entryStart() (int64, int) {
	for t.head < len(t.pending) {
		c := t.pending[t.head]
		if c != ' ' && c != '\t' && c != '\r' && c != '\n' && c != ',' {
			break
		}
		if c == '\n' {
			t.line++
		}
		t.head++
		t.base++
	}
	return t.base, t.line
}

// slice returns the bytes between two offsets still held.
func (t *trackingReader) slice(from, to int64) []byte {
	i, j := int(from-t.base)+t.head, int(to-t.base)+t.head
	if i < t.head || j > len(t.pending) || i > j {
		return nil
	}
	return bytes.TrimRight(t.pending[i:j], " \t\r\n")
}

// lineAt gives the line of an offset at or after base, when still held.
func (t *trackingReader) lineAt(off int64) int {
	k := int(off - t.base)
	if k < 0 || k > len(t.pending)-t.head {
		return 0
	}
	return t.line + bytes.Count(t.pending[t.head:t.head+k], []byte{'\n'})
}

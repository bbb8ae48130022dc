package web

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"cohortdesk/cohort"
)

// Uploads are received whole before anything is imported: the body is
// spooled to a temporary file (capped by the route's size limit) while the
// client sends it, however slowly, and only then is the file imported. So a
// slow client holds a file descriptor and some disk, never a database
// transaction, a connection or the importers' lock.

// uploadPrefix names spooled uploads in the temporary folder (TMPDIR).
const uploadPrefix = "cohortdesk-upload-"

// importsPerUser is how many uploads one person may have in progress at once
// (being received or imported); more are refused with 429.
const importsPerUser = 2

// spool copies r into a new temporary file and rewinds it. progress, when
// not nil, hears the bytes received so far about once a second. The caller
// closes the file and removes it (removeSpool).
func spool(ctx context.Context, r io.Reader, progress func(int64)) (*os.File, int64, error) {
	f, err := os.CreateTemp("", uploadPrefix+"*")
	if err != nil {
		return nil, 0, fmt.Errorf("web: spool upload: %w", err)
	}
	var n atomic.Int64
	stop := make(chan struct{})
	done := make(chan struct{})
	go func() {
		defer close(done)
		t := time.NewTicker(time.Second)
		defer t.Stop()
		for {
			select {
			case <-stop:
				return
			case <-ctx.Done():
				return
			case <-t.C:
				if progress != nil {
					progress(n.Load())
				}
			}
		}
	}()
	_, err = io.Copy(f, &countingWriter{r: r, n: &n})
	close(stop)
	<-done
	if err == nil {
		_, err = f.Seek(0, io.SeekStart)
	}
	if err != nil {
		removeSpool(f)
		return nil, n.Load(), err
	}
	return f, n.Load(), nil
}

// countingWriter is a reader that counts what passes.
type countingWriter struct {
	r io.Reader
	n *atomic.Int64
}

func (c *countingWriter) Read(p []byte) (int, error) {
	k, err := c.r.Read(p)
	c.n.Add(int64(k))
	return k, err
}

func removeSpool(f *os.File) {
	if f == nil {
		return
	}
	f.Close()
	os.Remove(f.Name())
}

// RemoveStaleUploads deletes spooled uploads older than age that a killed
// server left behind in the temporary folder, and reports how many.
func RemoveStaleUploads(age time.Duration) int {
	matches, _ := filepath.Glob(filepath.Join(os.TempDir(), uploadPrefix+"*"))
	n := 0
	for _, m := range matches {
		st, err := os.Stat(m)
		if err == nil && !st.IsDir() && time.Since(st.ModTime()) > age && strings.HasPrefix(filepath.Base(m), uploadPrefix) {
			if os.Remove(m) == nil {
				n++
			}
		}
	}
	return n
}

// uploadSlots counts each person's uploads in progress.
type uploadSlots struct {
	mu   sync.Mutex
	busy map[int64]int
}

// take claims one of the person's upload slots; release gives it back.
func (u *uploadSlots) take(userID int64) (release func(), ok bool) {
	u.mu.Lock()
	defer u.mu.Unlock()
	if u.busy == nil {
		u.busy = map[int64]int{}
	}
	if u.busy[userID] >= importsPerUser {
		return nil, false
	}
	u.busy[userID]++
	return func() {
		u.mu.Lock()
		defer u.mu.Unlock()
		if u.busy[userID]--; u.busy[userID] <= 0 {
			delete(u.busy, userID)
		}
	}, true
}

// errTooManyUploads answers a person who already has importsPerUser uploads
// in progress.
var errTooManyUploads = &cohort.PublicError{
	Message: fmt.Sprintf("You already have %d uploads in progress. Wait until one has finished, then send this file again.", importsPerUser),
	Kind:    errBusyUploads,
}

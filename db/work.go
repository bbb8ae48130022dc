package db

import (
	"sync/atomic"
	"time"
)

// WorkDone counts what this process imported and screened since it started,
// for the metrics (rates are taken by whoever reads them).
type WorkDone struct {
	ReadingsImported atomic.Int64 // readings stored by imports that committed
	ImportNanos      atomic.Int64 // time those imports took
	WeeksScreened    atomic.Int64 // participant-weeks screened and stored
	ScreenNanos      atomic.Int64 // time those screening runs took
}

// Work is this process's WorkDone.
var Work WorkDone

func (w *WorkDone) imported(readings int64, took time.Duration) {
	w.ReadingsImported.Add(readings)
	w.ImportNanos.Add(int64(took))
}

func (w *WorkDone) screened(weeks int64, took time.Duration) {
	w.WeeksScreened.Add(weeks)
	w.ScreenNanos.Add(int64(took))
}

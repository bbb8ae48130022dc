//go:build unix

package screen

import (
	"syscall"
	"time"
)

// processCPU is the user+system CPU time of the test process. Benchmarks use
// it beside wall time because on a shared machine wall time also counts the
// time other processes held the core.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

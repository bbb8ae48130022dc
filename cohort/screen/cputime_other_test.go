//go:build !unix

package screen

import "time"

// processCPU is unavailable here; the CPU-time metric is then left out.
func processCPU() time.Duration { return 0 }

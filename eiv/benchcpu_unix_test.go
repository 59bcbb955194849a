//go:build unix

package eiv_test

import (
	"syscall"
	"time"
)

// processCPU is the CPU time (user + system) the process has used so far:
// on a machine shared with other work, a benchmark's CPU time per
// operation, unlike its wall time, does not grow while it waits for a core.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

//go:build unix

package runtime

import (
	"syscall"
	"time"
)

// processCPU returns the CPU time (user and system) the process has used,
// so that benchmarks can tell a parallel speed-up from a busy machine.
func processCPU() (time.Duration, bool) {
	var r syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &r); err != nil {
		return 0, false
	}
	return time.Duration(r.Utime.Nano() + r.Stime.Nano()), true
}

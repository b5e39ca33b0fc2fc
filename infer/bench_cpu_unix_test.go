//go:build unix

package infer

import (
	"syscall"
	"time"
)

// processCPU is the user plus system CPU time of this process so far (all
// threads, the garbage collector's included); benchmarks report it per
// event next to the wall time, which other load on the machine inflates.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

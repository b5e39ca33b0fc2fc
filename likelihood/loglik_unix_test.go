//go:build unix

package likelihood

import "syscall"

// coreCPUTime returns the process's user + system CPU time in
// nanoseconds, for benchmarks on a shared machine (wall time there
// includes waiting for a core).
func coreCPUTime() (int64, bool) {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0, false
	}
	return ru.Utime.Nano() + ru.Stime.Nano(), true
}

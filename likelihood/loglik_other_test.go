//go:build !unix

package likelihood

// coreCPUTime is unavailable on this platform.
func coreCPUTime() (int64, bool) { return 0, false }

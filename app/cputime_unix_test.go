//go:build cgo && unix

package main

import (
	"syscall"
	"time"
)

// cpuTime returns the CPU time used by the process so far (user and
// system, all threads), for benchmarks on a shared machine where wall time
// depends on other load.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

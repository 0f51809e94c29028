package testkit

import (
	"syscall"
	"time"
)

// ThreadCPU returns the CPU time (user and system) used so far by the
// calling OS thread (getrusage RUSAGE_THREAD, Linux), and whether it could
// be measured. A benchmark that calls it locks its goroutine to its thread
// (runtime.LockOSThread) first.
func ThreadCPU() (time.Duration, bool) {
	var ru syscall.Rusage
	const rusageThread = 1 // RUSAGE_THREAD, Linux
	if err := syscall.Getrusage(rusageThread, &ru); err != nil {
		return 0, false
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano()), true
}

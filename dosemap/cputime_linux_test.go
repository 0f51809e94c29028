package dosemap

import (
	"syscall"
	"time"
)

// threadCPU returns the CPU time used so far by the calling OS thread
// (getrusage RUSAGE_THREAD), so benchmarks can report throughput per CPU
// second on a machine shared with other work.
func threadCPU() (time.Duration, bool) {
	var ru syscall.Rusage
	const rusageThread = 1 // RUSAGE_THREAD, Linux
	if err := syscall.Getrusage(rusageThread, &ru); err != nil {
		return 0, false
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano()), true
}

// processCPU returns the CPU time used so far by the whole process (all
// threads), for benchmarks of code that runs on several goroutines.
func processCPU() (time.Duration, bool) {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0, false
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano()), true
}

package testkit

import "time"

// CPUTime returns the CPU time (user and system, all threads) the process
// has used so far, or 0 where the system does not measure it. Benchmarks
// on a shared machine report it beside wall time, which depends on other
// load; a 0 means "report wall time only".
func CPUTime() time.Duration {
	d, _ := ProcessCPU()
	return d
}

//go:build cgo && !unix

package main

import "time"

// cpuTime is not measured on this system; benchmarks then report wall
// time only.
func cpuTime() time.Duration { return 0 }

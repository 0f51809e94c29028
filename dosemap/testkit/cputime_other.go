//go:build !unix

package testkit

import "time"

// ProcessCPU is not measured on this system: it returns 0, false.
func ProcessCPU() (time.Duration, bool) { return 0, false }

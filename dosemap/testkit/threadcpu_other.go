//go:build !linux

package testkit

import "time"

// ThreadCPU is not measured on this system: it returns 0, false.
func ThreadCPU() (time.Duration, bool) { return 0, false }

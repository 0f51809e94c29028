//go:build !linux

package dosemap

import "time"

// threadCPU is unavailable here; benchmarks then report wall-clock figures
// only.
func threadCPU() (time.Duration, bool) { return 0, false }

// processCPU is unavailable here.
func processCPU() (time.Duration, bool) { return 0, false }

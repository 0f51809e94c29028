//go:build !unix

package follow

import "time"

// processCPU is not measured here.
func processCPU() time.Duration { return 0 }

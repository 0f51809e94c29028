package review

import "math"

// DefaultDriftFlagC is the default Settings.DriftFlagC, the removed drift,
// °C, above which a sonication is flagged for review in the window, the
// reports and the commands: a working default of this program (no
// published source).
// Drift correction moves every temperature of the sonication by up to this
// much, so its dose deserves a second look.
const DefaultDriftFlagC = 1.0

// DriftFlagged reports whether the largest drift removed from q's frames
// exceeds limit °C (DefaultDriftFlagC when limit is not positive).
func (q SonicationQuality) DriftFlagged(limit float64) bool {
	return math.Abs(q.MaxDriftC) > driftLimit(limit)
}

// driftLimit returns limit, or DefaultDriftFlagC when it is not positive
// (a result written before Settings.DriftFlagC existed).
func driftLimit(limit float64) float64 {
	if !(limit > 0) {
		return DefaultDriftFlagC
	}
	return limit
}

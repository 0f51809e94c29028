package review

import "math"

// DefaultDriftFlagC is the removed drift, °C, above which a sonication is
// flagged for review in the window and the reports: a working default of
// this program (no published source), not a property of the analysis.
// Drift correction moves every temperature of the sonication by up to this
// much, so its dose deserves a second look.
const DefaultDriftFlagC = 1.0

// DriftFlagged reports whether the largest drift removed from q's frames
// exceeds limit °C (DefaultDriftFlagC when limit is not positive).
func (q SonicationQuality) DriftFlagged(limit float64) bool {
	if !(limit > 0) {
		limit = DefaultDriftFlagC
	}
	return math.Abs(q.MaxDriftC) > limit
}

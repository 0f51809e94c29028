package review

import "testing"

// TestDriftFlagged: the flag is raised strictly above the limit, on the
// magnitude of the drift either way, with DefaultDriftFlagC (1 °C, the
// program's default) when no limit is given.
func TestDriftFlagged(t *testing.T) {
	for _, c := range []struct {
		drift, limit float64
		want         bool
	}{{0.99, 0, false}, {1.0, 0, false}, {1.01, 0, true}, {-1.2, 0, true}, {1.2, 1.5, false}, {1.6, 1.5, true}} {
		if got := (SonicationQuality{MaxDriftC: c.drift}).DriftFlagged(c.limit); got != c.want {
			t.Errorf("drift %g °C, limit %g: flagged %v, want %v", c.drift, c.limit, got, c.want)
		}
	}
}

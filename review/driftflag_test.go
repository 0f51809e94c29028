package review

import (
	"fmt"
	"strings"
	"testing"
)

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

// TestDriftFlagInSummary: the text summary flags a sonication whose
// removed drift exceeds the settings' drift_flag_c, and only then.
func TestDriftFlagInSummary(t *testing.T) {
	for _, c := range []struct {
		limit float64
		want  bool
	}{{DefaultDriftFlagC, true}, {1.5, false}} {
		r := &Result{Settings: DefaultSettings(), Quality: []SonicationQuality{{Sonication: 2, MaxDriftC: -1.3}}}
		r.Settings.DriftFlagC = c.limit
		var b strings.Builder
		if err := r.WriteText(&b); err != nil {
			t.Fatal(err)
		}
		line := fmt.Sprintf("Sonication 2 thermometry: drift 1.30 °C removed, above the %g °C drift flag", c.limit)
		if got := strings.Contains(b.String(), line); got != c.want {
			t.Errorf("limit %g °C: line %q present %v, want %v\n%s", c.limit, line, got, c.want, b.String())
		}
	}
}

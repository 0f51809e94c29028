package review_test

import (
	"strings"
	"testing"

	"dosecover/dosemap/sim"
)

// TestUnseenHeatingNamed: a sonication whose planes hold no dose above the
// negligible level is ignored by the monitoring rule (README, "The
// monitoring rule"); the result names it in a warning, since its planes
// may have missed where it heated. Sonication 3 of a short two-plane
// session is simulated with no power (nothing heats); the others, measured
// through their foci, heat and are not named.
func TestUnseenHeatingNamed(t *testing.T) {
	if testing.Short() {
		t.Skip("writes a simulated session")
	}
	s := sim.PlanesSession(sim.LayoutTwoPlanes, 3)
	s.Sonications = s.Sonications[:5]
	s.Sonications[2].Power = 0
	r := analyseSession(t, s)
	var named []string
	for _, w := range r.Warnings {
		if strings.Contains(w, "planes missed it") {
			named = append(named, w)
		}
	}
	if len(named) != 1 || !strings.HasPrefix(named[0], "sonication 3:") {
		t.Errorf("warnings naming sonications without measured heating: %q; want one naming sonication 3 alone", named)
	}
	for _, sr := range r.Monitoring.Reach {
		if (sr.SemiAxesMM == nil) != (sr.Sonication == 3) {
			t.Errorf("sonication %d: semi-axes %v", sr.Sonication, sr.SemiAxesMM)
		}
	}
}

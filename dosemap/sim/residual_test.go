package sim

import (
	"math"
	"testing"
)

// TestHiddenHeatTruth: the truth of a session with short gaps records the
// rise left at each baseline. Checked against the bioheat grid itself: the
// first sonication starts on no residual heat; at a later one the hidden
// rise over the target and margin is at least the rise at the new focus
// the simulator recorded when that sonication began
// (focus_start_temperature_c − base, within 1.5 °C: the truth's value is
// the thermometry's slice average over the baseline frames, which blurs
// the 1.2 mm bioheat voxel); with the hidden heat counted, coverage cannot
// fall (dose only grows with temperature, Sapareto & Dewey 1984) and the
// cooling time is the gap given.
func TestHiddenHeatTruth(t *testing.T) {
	s := ShortGapSession(10)
	s.Sonications = s.Sonications[:3]
	res, err := s.simulate()
	if err != nil {
		t.Fatal(err)
	}
	tr := s.truth(res, newIDs(s))
	for n, so := range tr.Sonications {
		focus := so.StartTemp - s.Phantom.BodyTemp
		switch {
		case n == 0 && (so.HiddenRiseC != 0 || so.CoolingS != 0):
			t.Errorf("first sonication: hidden rise %g °C, cooling %g s; want 0", so.HiddenRiseC, so.CoolingS)
		case n > 0 && (so.HiddenRiseC < focus-1.5 || !(so.HiddenRiseC > 1) || so.CoolingS != 10):
			t.Errorf("sonication %d: hidden rise %.2f °C, rise at the focus %.2f °C, cooling %g s", so.Number, so.HiddenRiseC, focus, so.CoolingS)
		}
	}
	m := tr.Measured
	if !(m.WithHiddenHeat.CoveredFraction >= m.CoveredFraction) || math.IsNaN(m.WithHiddenHeat.CoveredFraction) {
		t.Errorf("covered %.3f with the hidden heat, %.3f as measured", m.WithHiddenHeat.CoveredFraction, m.CoveredFraction)
	}
}

package review_test

import (
	"fmt"
	"math"
	"testing"

	"dosecover/dosemap/sim"
	"dosecover/review"
)

// trueCoverage is truthCoverage with the true dose of the simulation
// (sim.Truth.Dose: the bioheat temperature itself, heat left from earlier
// sonications counted), sampled trilinearly at the analysis voxel centres.
func trueCoverage(r *review.Result, truth *sim.Truth) (frac, weight float64) {
	g := r.TargetMask.Geometry
	mask := r.Monitoring.Monitored
	var cov float64
	for v, o := range r.TargetMask.Data {
		if o == 0 || mask.Data[v] == 0 {
			continue
		}
		i, j, k := g.IJK(v)
		weight += float64(o)
		if d := truth.Dose.Sample(g.Point(float64(i), float64(j), float64(k))); d >= float32(truth.Threshold) {
			cov += float64(o)
		}
	}
	if weight == 0 {
		return math.NaN(), 0
	}
	return cov / weight, weight
}

// TestResidualHeatTwoPlanes: the two-plane sessions (a coronal and a
// sagittal plane through each focus, in one series with 13 s of cooling
// between sonications, and in one series per plane with 60 s and every
// third sonication left out, so that the true coverage stays below 100 %;
// sim.ShortGapPlanesSession), against the simulation's truth:
//   - with carry_over, the coverage over the region the monitoring rule
//     calls monitored is within 3 points of the true coverage there, the
//     bioheat dose with the hidden heat counted (sim.Truth.Dose; 3 points
//     as for the single-slab sessions of TestResidualHeatShortGaps, plus
//     one voxel where the region holds fewer than 100 analysis voxels);
//   - the correction raises the coverage, and the as-measured figures
//     beside it are those of the analysis without it;
//   - a residual heat estimate is reported for every sonication after the
//     first, and the warning names some.
func TestResidualHeatTwoPlanes(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses two 35-sonication sessions")
	}
	for _, tc := range []struct {
		l    sim.Layout
		gap  float64
		thin bool // every third sonication left out: holes the hidden heat may not fill
	}{{sim.LayoutTwoPlanes, 13, false}, {sim.LayoutTwoPlaneSeries, 60, true}} {
		l := tc.l
		t.Run(fmt.Sprintf("%s-%gs-thin%v", l, tc.gap, tc.thin), func(t *testing.T) {
			s := sim.ShortGapPlanesSession(l, 1, tc.gap)
			if tc.thin {
				kept := s.Sonications[:0]
				for n, so := range s.Sonications {
					if n%3 != 1 || so.Spill {
						kept = append(kept, so)
					}
				}
				s.Sonications = kept
			}
			m, c, tr := residualCase(t, s)
			want, w := trueCoverage(c, tr)
			if w < 10 {
				t.Fatalf("monitored target of %.1f analysis voxels: too small to check", w)
			}
			tol := 0.03 + 1/w
			wantM, _ := trueCoverage(m, tr)
			t.Logf("%s: coverage as measured %.3f (true there %.3f), corrected %.3f (true there %.3f, %.0f voxels, %.0f %% of the target monitored)",
				l, val(m.CoveredFraction), wantM, val(c.CoveredFraction), want, w, 100*c.MonitoredFraction)
			if d := math.Abs(val(c.CoveredFraction) - want); !(d <= tol) {
				t.Errorf("corrected coverage %.3f, true coverage over the same region %.3f (difference %.3f > %.3f)", val(c.CoveredFraction), want, d, tol)
			}
			if !(val(c.CoveredFraction) > val(m.CoveredFraction)) {
				t.Errorf("the correction did not raise coverage: %.3f as measured, %.3f corrected", val(m.CoveredFraction), val(c.CoveredFraction))
			}
			if c.AsMeasured == nil || val(c.AsMeasured.CoveredFraction) != val(m.CoveredFraction) || c.AsMeasured.OutsideMarginLethalML != m.OutsideMarginLethalML {
				t.Errorf("as measured beside the correction %+v; without it covered %v, outside %v mL", c.AsMeasured, val(m.CoveredFraction), m.OutsideMarginLethalML)
			}
			for n, st := range c.Sonications {
				if n > 0 && st.ResidualRiseC == nil {
					t.Errorf("sonication %d: no residual heat estimate", st.Number)
				}
			}
			if residualWarning(c) == "" {
				t.Error("no residual heat warning")
			}
		})
	}
}

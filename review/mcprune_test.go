package review

import (
	"context"
	"math"
	"testing"

	"dosecover/dosemap"
)

// TestMonteCarloRestrictedEqualsFull: simulating only the voxels whose
// outcome is uncertain (the bound of mcSkipSigmas) gives the same
// probability map, covered-fraction percentiles and hole probabilities as
// simulating every voxel of the target and margin region, exactly (the
// bound fails with probability below 1.2e-15 per frame drawn), for a
// seeded case of six sonications (CEM43 also with one ready dose map), at
// several thresholds analysed in turn on one session (the cache grows) and
// with an excluded sonication, for both dose models.
func TestMonteCarloRestrictedEqualsFull(t *testing.T) {
	for _, model := range []struct {
		name  string
		steps []mcStep
	}{
		{"cem43", []mcStep{{240, nil}, {100, nil}, {600, nil}, {240, []int{3}}}},
		{"arrhenius", []mcStep{{1, nil}, {0.3, nil}, {1, []int{2}}}},
	} {
		t.Run(model.name, func(t *testing.T) { checkRestrictedMC(t, model.name, model.steps) })
	}
}

// mcStep is one analysis of TestMonteCarloRestrictedEqualsFull.
type mcStep struct {
	thr      float64
	excluded []int
}

func checkRestrictedMC(t *testing.T, model string, steps []mcStep) {
	c := typicalCase(48, 6, 8)
	g := c.Sonications[0].Geometry
	if model == "cem43" {
		c.Sonications = append(c.Sonications, doseSonication(7, g, ballDose(dosemap.Vec3{2, -1, 0}, 3, 1.5)))
	}
	ctx := context.Background()
	set := DefaultSettings()
	set.Model = Model(model)
	set.Trials = 12
	set.Seed = 5
	pruned, err := Prepare(ctx, c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	full, err := Prepare(ctx, c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	full.exhaustiveMC = true
	for _, step := range steps {
		s := set
		s.Threshold, s.Excluded = step.thr, step.excluded
		a, err := pruned.Analyze(ctx, s, nil)
		if err != nil {
			t.Fatal(err)
		}
		b, err := full.Analyze(ctx, s, nil)
		if err != nil {
			t.Fatal(err)
		}
		if len(pruned.mcCache.idx) >= len(full.mcCache.idx) {
			t.Errorf("threshold %g: %d voxels simulated, no fewer than the %d of the region", step.thr, len(pruned.mcCache.idx), len(full.mcCache.idx))
		}
		if *a.CoveredFractionP05 != *b.CoveredFractionP05 || *a.CoveredFractionP95 != *b.CoveredFractionP95 {
			t.Errorf("threshold %g: p05/p95 %g/%g restricted, %g/%g full", step.thr, *a.CoveredFractionP05, *a.CoveredFractionP95, *b.CoveredFractionP05, *b.CoveredFractionP95)
		}
		diff, inside := 0, 0
		for n, x := range b.Probability.Data {
			y := a.Probability.Data[n]
			if x == x {
				inside++
			}
			if x != y && !(math.IsNaN(float64(x)) && math.IsNaN(float64(y))) {
				diff++
			}
		}
		if diff > 0 || inside == 0 {
			t.Errorf("threshold %g: %d of %d probabilities differ", step.thr, diff, inside)
		}
		if len(a.Holes) != len(b.Holes) {
			t.Fatalf("threshold %g: %d holes restricted, %d full", step.thr, len(a.Holes), len(b.Holes))
		}
		for h := range a.Holes {
			if *a.Holes[h].MeanProbability != *b.Holes[h].MeanProbability || a.Holes[h].Certainty != b.Holes[h].Certainty {
				t.Errorf("threshold %g hole %d: %g %s restricted, %g %s full", step.thr, h, *a.Holes[h].MeanProbability, a.Holes[h].Certainty, *b.Holes[h].MeanProbability, b.Holes[h].Certainty)
			}
		}
		t.Logf("threshold %g: %d of %d region voxels simulated; p05 %.4f p95 %.4f; %d holes", step.thr, len(pruned.mcCache.idx), len(full.mcCache.idx), *a.CoveredFractionP05, *a.CoveredFractionP95, len(a.Holes))
	}
}

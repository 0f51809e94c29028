package review_test

import (
	"context"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/review"
)

// TestStacksOutsideAnalysisRegion moves the stacks of simulated
// two-plane sonications (a coronal and a sagittal plane, one series per
// plane) 300 mm away from the target, where no analysis grid reaches:
// the first stack of one sonication, both stacks of another. Every stack
// so lost is named in a warning with its sonication and its series;
// nothing is dropped silently, and a sonication with no stack left in the
// region is said to have unknown dose there.
func TestStacksOutsideAnalysisRegion(t *testing.T) {
	if testing.Short() {
		t.Skip("writes a simulated session")
	}
	s := sim.PlanesSession(sim.LayoutTwoPlaneSeries, 2)
	s.Sonications = s.Sonications[:4]
	dir := t.TempDir()
	if _, err := sim.WriteSession(dir, s); err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	c, _, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Sonications) != 4 {
		t.Fatalf("%d sonications, want 4", len(c.Sonications))
	}
	far := dosemap.Vec3{0, 0, 300}
	first := c.Sonications[2] // its first stack only
	if len(first.Stacks) != 1 {
		t.Fatalf("sonication 3 has %d further stacks, want 1", len(first.Stacks))
	}
	first.Geometry.Origin = first.Geometry.Origin.Add(far)
	both := c.Sonications[3] // every stack
	both.Geometry.Origin = both.Geometry.Origin.Add(far)
	for _, st := range both.Stacks {
		st.Geometry.Origin = st.Geometry.Origin.Add(far)
	}
	set := review.DefaultSettings()
	set.Trials = 0
	r, err := review.Analyze(ctx, c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	warned := func(words ...string) bool {
		for _, w := range r.Warnings {
			all := true
			for _, x := range words {
				all = all && strings.Contains(w, x)
			}
			if all {
				return true
			}
		}
		return false
	}
	if !warned("sonication 3:", first.SeriesUID, "outside the analysis region") {
		t.Errorf("the first stack of sonication 3 (series %s) is dropped silently; warnings %q", first.SeriesUID, r.Warnings)
	}
	if warned("sonication 3:", first.Stacks[0].SeriesUID, "outside the analysis region") {
		t.Errorf("sonication 3's second stack (series %s), inside the region, is named as outside; warnings %q", first.Stacks[0].SeriesUID, r.Warnings)
	}
	for _, st := range append([]*dosemap.Sonication{both}, both.Stacks...) {
		if !warned("sonication 4:", st.SeriesUID, "outside the analysis region") {
			t.Errorf("stack of series %s of sonication 4 is dropped silently; warnings %q", st.SeriesUID, r.Warnings)
		}
	}
	if !warned("sonication 4:", "dose is unknown there") {
		t.Errorf("sonication 4, measured nowhere in the region, is not said to be unknown there; warnings %q", r.Warnings)
	}
	for _, w := range r.Warnings {
		if strings.HasPrefix(w, "sonication 1:") || strings.HasPrefix(w, "sonication 2:") {
			if strings.Contains(w, "outside the analysis region") {
				t.Errorf("sonications 1 and 2 lie in the region: %q", w)
			}
		}
	}
}

package review_test

import (
	"context"
	"math"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/review"
)

// truthCoverage returns the part of the target, weighted by its occupancy
// of each analysis voxel and restricted to the voxels where mask is 1,
// whose dose in the simulation's continuous field reaches the threshold,
// and the weight of the region. The dose is the change-only dose an ideal
// thermometry would measure (sim.Truth.ChangeDose, sampled trilinearly at
// the voxel centre): the thermometry cannot see heat left from earlier
// sonications, which is another question than where the planes lie.
func truthCoverage(r *review.Result, truth *sim.Truth, mask *dosemap.Volume) (frac, weight float64) {
	g := r.TargetMask.Geometry
	var cov float64
	for v, o := range r.TargetMask.Data {
		if o == 0 || (mask != nil && mask.Data[v] == 0) {
			continue
		}
		i, j, k := g.IJK(v)
		weight += float64(o)
		if d := truth.ChangeDose.Sample(g.Point(float64(i), float64(j), float64(k))); d >= float32(truth.Threshold) {
			cov += float64(o)
		}
	}
	if weight == 0 {
		return math.NaN(), 0
	}
	return cov / weight, weight
}

// TestPlanesSessions analyses the simulated 35-sonication sessions whose
// sonications are measured on their own planes (an axial slab moving with
// the focus; a coronal and a sagittal plane through each focus, in one
// series and in one series per plane), written as DICOM by the simulator
// and read back, against the simulation's truth (the continuous bioheat
// dose field and truth.json):
//   - 35 sonications are read (truth.json), each with its stacks;
//   - the coverage over the region the monitoring rule calls monitored is
//     within 3 points of the truth over the same region (the tolerance the
//     product promises for these sessions; thermometry noise, partial
//     volume of 3 mm slices and the change-only measurement account for
//     the difference; one voxel more where the region holds fewer than
//     100 analysis voxels);
//   - the lethal dose beyond the margin is found and attributed to the
//     sonication the simulation aimed beyond it;
//   - the hole left by the undelivered spots (+x edge, middle depth) is
//     found within 5 mm of where the simulation leaves the target
//     under-dosed on the measured planes.
func TestPlanesSessions(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses three 35-sonication sessions")
	}
	cases := []struct {
		name   string
		layout sim.Layout
		slices int // thermometry slices per stack; 0: the session's own
	}{
		{"moving-slab", sim.LayoutMovingSlab, 0},
		{"two-planes", sim.LayoutTwoPlanes, 0},
		{"two-plane-series", sim.LayoutTwoPlaneSeries, 0},
	}
	for _, tc := range cases {
		l := tc.layout
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			s := sim.PlanesSession(l, 1)
			if tc.slices > 0 {
				s.Thermometry.Slices = tc.slices
			}
			truth, err := sim.WriteSession(dir, s)
			if err != nil {
				t.Fatal(err)
			}
			ctx := context.Background()
			c, inv, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{Deferred: true}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(c.Sonications) != len(truth.Sonications) {
				t.Fatalf("%d sonications read, %d simulated; problems: %v", len(c.Sonications), len(truth.Sonications), inv.Problems)
			}
			wantStacks := 1
			if l == sim.LayoutTwoPlanes || l == sim.LayoutTwoPlaneSeries {
				wantStacks = 2
			}
			for _, so := range c.Sonications {
				if n := 1 + len(so.Stacks); n != wantStacks {
					t.Fatalf("sonication %d: %d stacks, want %d", so.Number, n, wantStacks)
				}
			}
			set := review.DefaultSettings()
			set.Trials = 0
			r, err := review.Analyze(ctx, c, set, nil)
			if err != nil {
				t.Fatal(err)
			}
			m := r.Monitoring
			if m == nil || m.Monitored == nil {
				t.Fatal("no monitoring report")
			}
			want, w := truthCoverage(r, truth, m.Monitored)
			if w < 10 {
				t.Fatalf("monitored target of %.1f analysis voxels: too small to check", w)
			}
			// With fewer than 100 voxels one voxel moves the fraction by
			// more than a point: widen the tolerance by one voxel.
			tol := 0.03 + 1/w
			t.Logf("%s: coverage %.3f of the monitored target (%.1f %% of it), truth there %.3f (%.0f voxels); strict %.3f (%.3f), measured planes %.3f (%.3f); truth whole target %.3f (change only %.3f)",
				l, (*r.CoveredFraction), 100*r.MonitoredFraction, want, w, m.StrictFraction, val(m.StrictCovered), m.MeasuredFraction, val(m.MeasuredCovered), truth.CoveredFraction, truth.ChangeCoveredFraction)
			if d := math.Abs((*r.CoveredFraction) - want); !(d <= tol) {
				t.Errorf("coverage %.3f of the monitored target, truth over the same region %.3f (difference %.3f > %.3f)", (*r.CoveredFraction), want, d, tol)
			}
			// Spill: the largest cluster beyond the margin comes from the
			// sonication aimed beyond it and lies within 5 mm of its focus
			// (common practice: about the focal spot's length across the
			// beam plus one voxel).
			if len(r.OutsideClusters) == 0 {
				t.Fatalf("no lethal cluster beyond the margin; truth: sonication(s) %v", truth.Spill)
			}
			cl := r.OutsideClusters[0]
			if len(truth.Spill) != 1 || cl.Sonication != truth.Spill[0] {
				t.Errorf("largest cluster beyond the margin attributed to sonication %d; truth %v", cl.Sonication, truth.Spill)
			} else if d := dosemap.Vec3(cl.CentroidMM).Sub(truth.Sonications[truth.Spill[0]-1].Focus).Norm(); d > 5 {
				t.Errorf("cluster beyond the margin at %v, %.1f mm from the spilled focus %v", cl.CentroidMM, d, truth.Sonications[truth.Spill[0]-1].Focus)
			}
			// Hole: where the undelivered spots were planned.
			var centre dosemap.Vec3
			for _, n := range truth.Undelivered {
				centre = centre.Add(truth.Planned[n-1].Position.Scale(1 / float64(len(truth.Undelivered))))
			}
			found := false
			for _, h := range r.Holes {
				if dosemap.Vec3(h.CentroidMM).Sub(centre).Norm() <= 5 && h.VolumeMM3 >= 5 {
					found = true
				}
			}
			if !found {
				t.Errorf("no hole within 5 mm of the undelivered spots (%v); holes: %+v", centre, r.Holes)
			}
		})
	}
}

func val(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

// TestPlaneOutsideAnalysisRegion moves one stack of a sonication far from
// the target: the analysis names the sonication and the series of that
// stack instead of dropping it silently.
func TestPlaneOutsideAnalysisRegion(t *testing.T) {
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
	so := c.Sonications[1]
	if len(so.Stacks) != 1 {
		t.Fatalf("sonication 2 has %d further stacks, want 1", len(so.Stacks))
	}
	far := so.Stacks[0]
	far.Geometry.Origin = far.Geometry.Origin.Add(dosemap.Vec3{0, 0, 300})
	set := review.DefaultSettings()
	set.Trials = 0
	r, err := review.Analyze(ctx, c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, w := range r.Warnings {
		if strings.Contains(w, "sonication 2") && strings.Contains(w, far.SeriesUID) && strings.Contains(w, "outside the analysis region") {
			found = true
		}
	}
	if !found {
		t.Errorf("no warning names sonication 2 and series %s; warnings: %q", far.SeriesUID, r.Warnings)
	}
}

// TestMovingSlabMatchesSharedSlab measures the same simulated treatment
// twice: on a slab of five 3 mm slices that moves with the focus depth,
// and on one shared slab of seven 3 mm slices that holds the whole target
// (the case dosecover handled before planes that move). A slab of five
// slices holds the heating along its normal, so the monitoring rule
// monitors at least 90 % of the target, and the covered fraction must be
// that of the shared slab within 2 points (reference: the shared-slab
// analysis of the same simulation; the two differ in their noise draws and
// in which slices measured each voxel).
func TestMovingSlabMatchesSharedSlab(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses two 35-sonication sessions")
	}
	moving := sim.PlanesSession(sim.LayoutMovingSlab, 3)
	moving.Thermometry.Slices = 5
	shared := sim.PlanesSession(sim.LayoutSlab, 3)
	shared.Thermometry.Slices = 7
	rm, rs := analyseSession(t, moving), analyseSession(t, shared)
	t.Logf("moving slab: %.3f of %.1f %% monitored; shared slab: %.3f of %.1f %%", (*rm.CoveredFraction), 100*rm.MonitoredFraction, (*rs.CoveredFraction), 100*rs.MonitoredFraction)
	if rm.MonitoredFraction < 0.9 {
		t.Errorf("moving slab of five slices: %.1f %% of the target monitored, want at least 90 %%", 100*rm.MonitoredFraction)
	}
	if d := math.Abs((*rm.CoveredFraction) - (*rs.CoveredFraction)); !(d <= 0.02) {
		t.Errorf("covered fraction %.3f on the moving slab, %.3f on the shared slab (difference %.3f > 0.02)", (*rm.CoveredFraction), (*rs.CoveredFraction), d)
	}
	if len(rm.OutsideClusters) == 0 || len(rs.OutsideClusters) == 0 || rm.OutsideClusters[0].Sonication != rs.OutsideClusters[0].Sonication {
		t.Errorf("spill attribution differs: moving %+v, shared %+v", rm.OutsideClusters, rs.OutsideClusters)
	}
}

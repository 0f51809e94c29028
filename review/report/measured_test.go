package report

import (
	"context"
	"math"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/review"
	"dosecover/review/view"
)

// TestPanelsOnMeasuredPlanes: on the simulated session measured on a
// coronal and a sagittal plane through each focus (sim.LayoutTwoPlanes,
// invented), the report shows the hole and the cluster beyond the margin
// on planes that were measured. The planes are checked against the
// simulator's own (sim.Session.StackGeometries), not the reader's: the
// plane a panel's caption names must be within 0.05 mm (the caption's
// rounding) of a simulated plane of the same orientation, and hold voxels
// of the region it shows within half a slice thickness, where the
// analysed dose is measured (not NaN). On this session the hole's
// centroid lies between the simulated sagittal planes (logged), so the
// plane through the centroid is not a measured one. The target panel
// shows another plane than the hole panel. With sonication 30 (the one
// beyond the margin) left out, the panel without a cluster lies on a third
// measured plane through the target (checkMeasuredPanels).
func TestPanelsOnMeasuredPlanes(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses a 35-sonication session")
	}
	dir := t.TempDir()
	s := sim.PlanesSession(sim.LayoutTwoPlanes, 1)
	if _, err := sim.WriteSession(dir, s); err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	c, _, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{Deferred: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	set := review.DefaultSettings()
	set.Trials = 0
	r, err := review.Analyze(ctx, c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(r.Holes) == 0 || len(r.OutsideClusters) == 0 {
		t.Fatalf("%d holes and %d clusters beyond the margin; the session has one of each", len(r.Holes), len(r.OutsideClusters))
	}
	var planes []dosemap.Geometry
	for n := range s.Sonications {
		planes = append(planes, s.StackGeometries(n)...)
	}
	half := s.Thermometry.SliceThickness / 2

	// The plane through the hole's centroid is not a measured one.
	hc := dosemap.Vec3(r.Holes[0].CentroidMM)
	measuredAt := func(p dosemap.Vec3, axis int) bool {
		for _, g := range planes {
			if math.Abs(g.Normal[axis]) > 0.999 && math.Abs(p[axis]-g.Origin[axis]) <= half {
				return true
			}
		}
		return false
	}
	t.Logf("hole centroid %.1f mm; on a measured sagittal plane: %v", hc, measuredAt(hc, 0))

	panels, err := Panels(c, r, 240)
	if err != nil {
		t.Fatal(err)
	}
	caption := regexp.MustCompile(`^(sagittal, x|coronal, y|axial, z) = (-?[0-9.]+) mm`)
	// The target panel takes another measured plane than the hole's.
	if a, b := caption.FindString(panels[0].Caption), caption.FindString(panels[1].Caption); a == "" || a == b {
		t.Errorf("target panel %q and hole panel %q: want two different named planes", panels[0].Caption, panels[1].Caption)
	}
	for _, tc := range []struct {
		panel  int
		labels *dosemap.Volume
	}{{1, r.HoleLabels}, {2, r.SpillLabels}} {
		p := panels[tc.panel]
		m := caption.FindStringSubmatch(p.Caption)
		if m == nil {
			t.Errorf("%s: caption %q names no axial, coronal or sagittal plane", p.Title, p.Caption)
			continue
		}
		axis := map[string]int{"sagittal, x": 0, "coronal, y": 1, "axial, z": 2}[m[1]]
		at, _ := strconv.ParseFloat(m[2], 64)
		// A simulated plane of that orientation within the caption's
		// rounding.
		var plane *dosemap.Geometry
		for n, g := range planes {
			if math.Abs(g.Normal[axis]) > 0.999 && math.Abs(g.Origin[axis]-at) <= 0.05+1e-9 {
				plane = &planes[n]
				break
			}
		}
		if plane == nil {
			t.Errorf("%s: %s = %.1f mm is no simulated thermometry plane", p.Title, m[1], at)
			continue
		}
		if !strings.Contains(p.Caption, "measured plane of") || strings.Contains(p.Caption, "nearest") {
			t.Errorf("%s: caption %q does not say the plane was measured through the region", p.Title, p.Caption)
		}
		// Voxels of the region within half a slice of the plane, with a
		// measured dose there.
		lg := tc.labels.Geometry
		held, measured := 0, 0
		for n, v := range tc.labels.Data {
			if v != 1 {
				continue
			}
			i, j, k := lg.IJK(n)
			q := lg.Point(float64(i), float64(j), float64(k))
			if math.Abs(q[axis]-plane.Origin[axis]) > half {
				continue
			}
			held++
			if d := r.Dose.Sample(q); d == d {
				measured++
			}
		}
		t.Logf("%s: %q; %d voxels of the region on the plane, %d with a measured dose", p.Title, p.Caption, held, measured)
		if held == 0 || measured == 0 {
			t.Errorf("%s: the plane %s = %.1f mm holds %d voxels of the region, %d with a measured dose; want some", p.Title, m[1], at, held, measured)
		}
	}

	// Sonication 30 (the one beyond the margin) left out: the hole stays,
	// and the panel without a cluster lies on a third measured plane
	// through the target.
	set.Excluded = []int{30}
	r, err = review.Analyze(ctx, c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(r.Holes) == 0 || len(r.OutsideClusters) != 0 {
		t.Fatalf("sonication 30 left out: %d holes and %d clusters beyond the margin; want the hole and no cluster", len(r.Holes), len(r.OutsideClusters))
	}
	if panels, err = Panels(c, r, 240); err != nil {
		t.Fatal(err)
	}
	checkMeasuredPanels(t, r, panels, simulatedPlanes(s))
}

// checkMeasuredPanels checks that every panel lies on a plane the
// simulator measured (acquiredPlane), no two on the same plane, its
// caption naming whose measured plane it is, and that the target voxels on
// the plane of each panel without a hole or cluster to show have a
// measured dose.
func checkMeasuredPanels(t *testing.T, r *review.Result, panels []Panel, planes []dosemap.Geometry) {
	t.Helper()
	var drawn []dosemap.Geometry
	for _, p := range panels {
		g, ok := acquiredPlane(planes, p.plane)
		if !ok {
			t.Errorf("%s: %q is no plane the simulator measured", p.Title, p.Caption)
			continue
		}
		for _, d := range drawn {
			if math.Abs(d.Normal.Unit().Dot(g.Normal.Unit())) >= 1-1e-6 && math.Abs(g.Origin.Sub(d.Origin).Dot(g.Normal.Unit())) <= 0.01 {
				t.Errorf("%s: %q repeats the plane of an earlier panel", p.Title, p.Caption)
			}
		}
		drawn = append(drawn, g)
		if !strings.Contains(p.Caption, "; measured plane of ") || strings.Contains(p.Caption, "nearest") {
			t.Errorf("%s: caption %q does not name whose measured plane it is", p.Title, p.Caption)
		}
		held, measured := measuredOnPlane(r, g)
		t.Logf("%s: %q; %d target voxels on the plane, %d with a measured dose", p.Title, p.Caption, held, measured)
		if strings.HasPrefix(p.Title, "No ") && (held == 0 || measured < held/2) {
			t.Errorf("%s: %d target voxels on the plane, %d with a measured dose; want most measured", p.Title, held, measured)
		}
	}
}

// deliveredSession returns sim.PlanesSession(l, 1) with every planned spot
// delivered as planned: the sonication that landed beyond the margin left
// out and the two spots the session never delivered added, each right
// after its neighbour on the same depth, like the first pass's spots, and
// every power raised by a third (the first pass at the demo's full power)
// so that the lethal dose reaches the target's edges (invented, as the
// simulator's sessions are). Analysed with a 5 mm margin it has neither a
// hole nor lethal dose beyond the margin (checked by the test), so the
// report draws both fallback panels.
func deliveredSession(l sim.Layout) *sim.Session {
	s := sim.PlanesSession(l, 1)
	delivered := map[int]bool{}
	for _, so := range s.Sonications {
		if !so.Spill {
			delivered[so.Planned] = true
		}
	}
	first := s.Sonications[0] // a spot of the first pass: its power, heating and cooling
	var out []sim.SonicationSpec
	for _, so := range s.Sonications {
		if so.Spill {
			continue
		}
		out = append(out, so)
		for k := so.Planned + 1; so.Planned > 0 && k <= len(s.Planned) && !delivered[k]; k++ {
			add := first
			add.Planned, add.Focus = k, s.Planned[k-1]
			out = append(out, add)
			delivered[k] = true
		}
	}
	for n := range out {
		out[n].Power *= 4.0 / 3
	}
	s.Sonications = out
	return s
}

// simulatedPlanes returns the grids the simulator measured every
// sonication on (sim.Session.StackGeometries), one per slice.
func simulatedPlanes(s *sim.Session) []dosemap.Geometry {
	var out []dosemap.Geometry
	for n := range s.Sonications {
		for _, g := range s.StackGeometries(n) {
			for k := 0; k < g.Slices; k++ {
				one := g
				one.Origin, one.Slices = g.Point(0, 0, float64(k)), 1
				out = append(out, one)
			}
		}
	}
	return out
}

// acquiredPlane returns the simulated slice whose plane pl is: the same
// normal (|cos| at least 1 − 1e-6, about 0.08°: the direction cosines are
// written as DS values of up to 16 characters, PS3.5 6.2) and the same
// offset along it within 0.01 mm (the positions are written as DS too;
// a slice is 3 mm thick). The plane of a slice is the plane of its pixel
// centres, through Image Position (Patient) with the normal the cross
// product of the Image Orientation (Patient) cosines (DICOM PS3.3
// C.7.6.2.1.1).
func acquiredPlane(planes []dosemap.Geometry, pl view.Plane) (dosemap.Geometry, bool) {
	n := pl.Normal()
	for _, g := range planes {
		if math.Abs(g.Normal.Unit().Dot(n)) >= 1-1e-6 && math.Abs(pl.Distance(g.Origin)) <= 0.01 {
			return g, true
		}
	}
	return dosemap.Geometry{}, false
}

// measuredOnPlane counts the voxels of the target mask of r within half a
// slice thickness of plane g and those of them whose analysed dose is
// measured (not NaN).
func measuredOnPlane(r *review.Result, g dosemap.Geometry) (held, measured int) {
	tg := r.TargetMask.Geometry
	n := g.Normal.Unit()
	for i, v := range r.TargetMask.Data {
		if !(v >= 0.5) {
			continue
		}
		a, b, c := tg.IJK(i)
		q := tg.Point(float64(a), float64(b), float64(c))
		if math.Abs(q.Sub(g.Origin).Dot(n)) > g.Spacing[2]/2 {
			continue
		}
		held++
		if d := r.Dose.Sample(q); d == d {
			measured++
		}
	}
	return held, measured
}

// TestFallbackPanelsOnMeasuredPlanes: on simulated sessions measured on
// planes of their own (a moving axial slab, a coronal and a sagittal plane
// through each focus) with every spot delivered as planned, there is no
// hole and no lethal dose beyond the margin, and every panel of the report,
// the two fallback panels included, lies on a plane the simulator
// measured (sim.Session.StackGeometries, compared as acquiredPlane says),
// three different planes, each holding target voxels with a measured dose;
// the captions say whose plane it is. With only one sonication of the
// two-plane session kept, its two planes show the target and the hole, and
// the panel without a cluster, which no other measured plane can show,
// is a reformat whose caption says it is not a measured plane.
func TestFallbackPanelsOnMeasuredPlanes(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses two 36-sonication sessions")
	}
	for _, l := range []sim.Layout{sim.LayoutTwoPlanes, sim.LayoutMovingSlab} {
		t.Run(l.String(), func(t *testing.T) {
			dir := t.TempDir()
			s := deliveredSession(l)
			if _, err := sim.WriteSession(dir, s); err != nil {
				t.Fatal(err)
			}
			ctx := context.Background()
			c, _, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{Deferred: true}, nil)
			if err != nil {
				t.Fatal(err)
			}
			set := review.DefaultSettings()
			set.Trials = 0
			set.MarginMM = 5
			r, err := review.Analyze(ctx, c, set, nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(r.Holes) != 0 || len(r.OutsideClusters) != 0 {
				t.Fatalf("%d holes and %d clusters beyond the margin; every spot was delivered as planned", len(r.Holes), len(r.OutsideClusters))
			}
			panels, err := Panels(c, r, 240)
			if err != nil {
				t.Fatal(err)
			}
			if len(panels) != 3 || !strings.HasPrefix(panels[1].Title, "No hole") || panels[2].Title != "No lethal dose outside margin" {
				t.Fatalf("panels %v: want the target and the two panels without a hole or cluster", titles(panels))
			}
			checkMeasuredPanels(t, r, panels, simulatedPlanes(s))
			if l != sim.LayoutTwoPlanes {
				return
			}

			// Only the sonication nearest the lesion's centre kept: its
			// coronal and sagittal planes show the target and the hole;
			// no other measured plane holds the target, and the panel
			// without a cluster says its plane is not a measured one.
			keep := 0
			for n, so := range s.Sonications {
				if so.Focus.Sub(s.Phantom.Lesion.Center).Norm() < s.Sonications[keep].Focus.Sub(s.Phantom.Lesion.Center).Norm() {
					keep = n
				}
			}
			set.Excluded = nil
			for n := range s.Sonications {
				if n != keep {
					set.Excluded = append(set.Excluded, n+1)
				}
			}
			if r, err = review.Analyze(ctx, c, set, nil); err != nil {
				t.Fatal(err)
			}
			if len(r.Holes) == 0 || len(r.OutsideClusters) != 0 {
				t.Fatalf("one sonication kept: %d holes, %d clusters beyond the margin; want a hole and no cluster", len(r.Holes), len(r.OutsideClusters))
			}
			if panels, err = Panels(c, r, 240); err != nil {
				t.Fatal(err)
			}
			kept := s.StackGeometries(keep)
			checkMeasuredPanels(t, r, panels[:2], kept)
			p := panels[2]
			t.Logf("%s: %q", p.Title, p.Caption)
			if _, ok := acquiredPlane(kept, p.plane); ok || !strings.Contains(p.Caption, "not a measured plane") || strings.Contains(p.Caption, "measured plane of") {
				t.Errorf("%s: caption %q; want a reformat saying it is not a measured plane (on a measured plane: %v)", p.Title, p.Caption, ok)
			}
		})
	}
}

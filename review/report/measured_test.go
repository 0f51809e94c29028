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
// shows another plane than the hole panel.
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
}

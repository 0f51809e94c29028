package review

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"
	"testing"

	"dosecover/dosemap"
)

// doseSonication samples f (CEM43 at patient mm) on g as a ready dose map.
func doseSonication(n int, g dosemap.Geometry, f func(p dosemap.Vec3) float64) *dosemap.Sonication {
	d := make([]float32, g.Len())
	for v := range d {
		d[v] = float32(f(g.Point(ijk(g, v))))
	}
	return &dosemap.Sonication{Number: n, Label: "sonication", Geometry: g, Dose: d}
}

// ballDose is a dose field that falls exponentially (length scale lam mm)
// with distance from c, equal to 240 CEM43 at radius r.
func ballDose(c dosemap.Vec3, r, lam float64) func(p dosemap.Vec3) float64 {
	return func(p dosemap.Vec3) float64 { return 240 * math.Exp((r-p.Sub(c).Norm())/lam) }
}

// thermoGrid is a 1.25x1.25x3 mm axial thermometry grid centred near
// origin (common practice resolution; testdata/check-values.md).
func thermoGrid(cols, rows, slices int) dosemap.Geometry {
	sp := dosemap.Vec3{1.25, 1.25, 3}
	return dosemap.NewAxialGeometry(cols, rows, slices, sp,
		dosemap.Vec3{-sp[0] * float64(cols-1) / 2, -sp[1] * float64(rows-1) / 2, -sp[2] * float64(slices-1) / 2})
}

func analyseCase(t testing.TB, c *dosemap.Case, set Settings) *Result {
	t.Helper()
	r, err := Analyze(context.Background(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// lensVolume is the volume of the intersection of two spheres of radii R
// and r whose centres are d apart (R-r < d < R+r):
//
//	V = π (R + r − d)² (d² + 2dr − 3r² + 2dR + 6rR − 3R²) / (12 d)
//
// (Weisstein, "Sphere-Sphere Intersection", MathWorld; Kern & Bland,
// Solid Mensuration, 1948).
func lensVolume(R, r, d float64) float64 {
	return math.Pi * (R + r - d) * (R + r - d) * (d*d + 2*d*r - 3*r*r + 2*d*R + 6*r*R - 3*R*R) / (12 * d)
}

// TestCoveredFractionLens: target sphere r = 10 mm, lethal sphere r = 9 mm
// offset by 3 mm, thermometry voxels 1.25x1.25x3 mm: the covered fraction
// equals V_lens/V_target = 2680.8/4188.8 = 0.640 (computed) within 1
// percentage point.
func TestCoveredFractionLens(t *testing.T) {
	want := lensVolume(10, 9, 3) / (4.0 / 3 * math.Pi * 1000)
	if math.Abs(want-0.64) > 0.001 {
		t.Fatalf("lens formula gives %.4f, want 0.640 (computed by hand)", want)
	}
	for _, tc := range []struct {
		name   string
		centre dosemap.Vec3 // target centre
		dir    dosemap.Vec3 // offset direction of the lethal sphere
	}{
		{"offset along x", dosemap.Vec3{0.3, -0.2, 0.4}, dosemap.Vec3{1, 0, 0}},
		{"offset along z (across slices)", dosemap.Vec3{-0.4, 0.1, -0.7}, dosemap.Vec3{0, 0, 1}},
		{"oblique offset", dosemap.Vec3{0.1, 0.5, 1.2}, dosemap.Vec3{1, 1, 1}.Unit()},
	} {
		t.Run(tc.name, func(t *testing.T) {
			g := thermoGrid(32, 32, 12)
			lc := tc.centre.Add(tc.dir.Scale(3))
			c := &dosemap.Case{Label: "phantom",
				Sonications: []*dosemap.Sonication{doseSonication(1, g, ballDose(lc, 9, 1.5))},
				Structures:  []dosemap.Structure{sphereStructure("target", tc.centre, 10, 1.5, 0.3, 128, dosemap.RoleTarget)},
			}
			set := DefaultSettings()
			set.Trials = 0
			r := analyseCase(t, c, set)
			if math.Abs((*r.CoveredFraction)-want) > 0.01 {
				t.Errorf("covered fraction %.4f, want %.4f within 0.01", (*r.CoveredFraction), want)
			}
			if math.Abs(r.MonitoredFraction-1) > 1e-9 {
				t.Errorf("monitored fraction %.4f, want 1 (target inside the thermometry)", r.MonitoredFraction)
			}
			t.Logf("covered %.4f vs %.4f; target %.3f mL", (*r.CoveredFraction), want, r.TargetVolumeML)
		})
	}
}

// TestNotMonitored: thermometry of 4 slices x 3 mm covers |z| <= 6 mm of a
// sphere r = 10 mm; the monitored part is ∫π(r²−z²)dz over [−6, 6] =
// 2π(600 − 72) = 3317.5 mm³, fraction 0.7920 (computed), within 1.5
// points (slab model of the contours, 1.5 mm spacing). A lethal dose over
// the whole field covers all of the monitored part but only that part of
// the whole target.
func TestNotMonitored(t *testing.T) {
	g := thermoGrid(32, 32, 4)
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{doseSonication(1, g, func(dosemap.Vec3) float64 { return 1000 })},
		Structures:  []dosemap.Structure{sphereStructure("target", dosemap.Vec3{0.2, 0.1, 0}, 10, 1.5, 0, 128, dosemap.RoleTarget)},
	}
	set := DefaultSettings()
	r := analyseCase(t, c, set)
	want := 2 * math.Pi * 528 / (4.0 / 3 * math.Pi * 1000)
	if math.Abs(r.MonitoredFraction-want) > 0.015 {
		t.Errorf("monitored fraction %.4f, want %.4f", r.MonitoredFraction, want)
	}
	if math.Abs((*r.CoveredFraction)-1) > 1e-9 || math.Abs(r.CoveredFractionOfTarget-r.MonitoredFraction) > 1e-9 {
		t.Errorf("covered %.4f of monitored, %.4f of target; want 1 and %.4f", (*r.CoveredFraction), r.CoveredFractionOfTarget, r.MonitoredFraction)
	}
	if len(r.Holes) != 0 {
		t.Errorf("%d holes; the unmonitored part must not be a hole", len(r.Holes))
	}
	if !strings.Contains(strings.Join(r.Warnings, " "), "not monitored") {
		t.Errorf("no warning about the unmonitored part: %q", r.Warnings)
	}
}

// TestKnownHole: lethal dose everywhere except inside a sphere r = 3 mm
// placed 4 mm from the centre of a target r = 10 mm. One hole, volume
// 4/3·π·27 = 113.1 mm³ (computed) within 20 % (a 6 mm object on 1.25 mm /
// 1 mm voxels), centroid within 0.7 mm, depth 3 mm within one voxel,
// inside (not touching the surface).
func TestKnownHole(t *testing.T) {
	g := thermoGrid(32, 32, 12)
	hc := dosemap.Vec3{4, 1, 0.5}
	dose := func(p dosemap.Vec3) float64 { return 240 * math.Exp((p.Sub(hc).Norm()-3)/1.0) }
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{doseSonication(1, g, dose)},
		Structures:  []dosemap.Structure{sphereStructure("target", dosemap.Vec3{0, 0, 0}, 10, 1.5, 0, 128, dosemap.RoleTarget)},
	}
	set := DefaultSettings()
	r := analyseCase(t, c, set)
	if len(r.Holes) != 1 {
		t.Fatalf("%d holes, want 1: %+v", len(r.Holes), r.Holes)
	}
	h := r.Holes[0]
	want := 4.0 / 3 * math.Pi * 27
	if math.Abs(h.VolumeMM3-want) > 0.2*want {
		t.Errorf("hole volume %.1f mm³, want %.1f", h.VolumeMM3, want)
	}
	if d := dosemap.Vec3(h.CentroidMM).Sub(hc).Norm(); d > 0.7 {
		t.Errorf("hole centroid %v, want %v (off %.2f mm)", h.CentroidMM, hc, d)
	}
	if math.Abs(h.DepthMM-3) > 1.25 {
		t.Errorf("hole depth %.2f mm, want 3", h.DepthMM)
	}
	if h.TouchesSurface {
		t.Error("hole touches the surface, want inside")
	}
	// Covered plus holes make up the monitored target (definition).
	if sum := r.CoveredVolumeML*1000 + h.VolumeMM3; math.Abs(sum-r.MonitoredVolumeML*1000) > 1e-6*sum {
		t.Errorf("covered %.3f + hole %.3f mm³ != monitored %.3f", r.CoveredVolumeML*1000, h.VolumeMM3, r.MonitoredVolumeML*1000)
	}
	if math.Abs((*r.CoveredFraction)-(1-want/(4.0/3*math.Pi*1000))) > 0.01 {
		t.Errorf("covered fraction %.4f", (*r.CoveredFraction))
	}
	if h.CentroidSlice != 6 && h.CentroidSlice != 7 {
		// z = 0.5 lies between slices 6 (z=-1.5) and 7 (z=1.5), nearer 7.
		t.Errorf("centroid slice %d, want 7", h.CentroidSlice)
	}
	t.Logf("hole %+v", h)

	// The same hole moved to the surface touches it.
	hc = dosemap.Vec3{9, 0, 0}
	c.Sonications[0] = doseSonication(1, g, dose)
	r = analyseCase(t, c, set)
	if len(r.Holes) != 1 || !r.Holes[0].TouchesSurface {
		t.Errorf("surface hole: %+v", r.Holes)
	}
}

// TestKnownSpill: sonication 1 covers the target (lethal to r = 12 mm,
// inside the 3 mm margin); sonication 2 puts a lethal ball r = 3 mm centred
// 17 mm from the target centre, wholly beyond the margin (14..20 mm). One
// outside cluster of 113.1 mm³ (computed) within 20 %, attributed to
// sonication 2, reaching 10 mm beyond the target surface within one voxel.
func TestKnownSpill(t *testing.T) {
	g := thermoGrid(48, 48, 14)
	sc := dosemap.Vec3{17, 0, 0}
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{
			doseSonication(1, g, ballDose(dosemap.Vec3{}, 12, 1)),
			doseSonication(2, g, ballDose(sc, 3, 1)),
		},
		Structures: []dosemap.Structure{sphereStructure("target", dosemap.Vec3{}, 10, 1.5, 0, 128, dosemap.RoleTarget)},
	}
	set := DefaultSettings()
	ses, err := Prepare(context.Background(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	r, err := ses.Analyze(context.Background(), set, nil)
	if err != nil {
		t.Fatal(err)
	}
	want := 4.0 / 3 * math.Pi * 27
	if len(r.OutsideClusters) != 1 {
		t.Fatalf("%d outside clusters, want 1: %+v", len(r.OutsideClusters), r.OutsideClusters)
	}
	cl := r.OutsideClusters[0]
	if math.Abs(cl.VolumeMM3-want) > 0.2*want || math.Abs(r.OutsideMarginLethalML*1000-cl.VolumeMM3) > 1e-6 {
		t.Errorf("cluster %.1f mm³ (total %.4f mL), want %.1f", cl.VolumeMM3, r.OutsideMarginLethalML, want)
	}
	if cl.Sonication != 2 {
		t.Errorf("cluster attributed to sonication %d, want 2", cl.Sonication)
	}
	if math.Abs(cl.MaxDistanceMM-10) > 1.25 {
		t.Errorf("max distance %.2f mm, want 10", cl.MaxDistanceMM)
	}
	if d := dosemap.Vec3(cl.CentroidMM).Sub(sc).Norm(); d > 0.7 {
		t.Errorf("centroid %v, want %v", cl.CentroidMM, sc)
	}
	if (*r.CoveredFraction) < 0.999 {
		t.Errorf("covered fraction %.4f, want 1", (*r.CoveredFraction))
	}
	// Delivery order: sonication 1 covers everything, 2 adds the spill.
	s1, s2 := r.Sonications[0], r.Sonications[1]
	if !(fracOf(s1.AddedCoverage) >= 0.999) || fracOf(s2.AddedCoverage) != 0 || s1.OutsideAddedML != 0 ||
		math.Abs(s2.OutsideAddedML-r.OutsideMarginLethalML) > 1e-9 ||
		math.Abs(s1.LethalAddedML+s2.LethalAddedML-r.LethalVolumeML) > 1e-9 {
		t.Errorf("per sonication: %+v %+v", s1, s2)
	}
	// Excluding sonication 2 removes the spill; a wider margin takes it in.
	set.Excluded = []int{2}
	if r, err = ses.Analyze(context.Background(), set, nil); err != nil || len(r.OutsideClusters) != 0 || !r.Sonications[1].Excluded {
		t.Errorf("excluded: %v %+v", err, r)
	}
	set.Excluded, set.MarginMM = nil, 11
	if r, err = ses.Analyze(context.Background(), set, nil); err != nil || r.OutsideMarginLethalML > 0.01*want/1000 {
		t.Errorf("margin 11 mm: %v, %.4f mL outside", err, r.OutsideMarginLethalML)
	}
	// The JSON carries the named fields.
	var buf strings.Builder
	if err := r.WriteJSON(&buf); err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal([]byte(buf.String()), &m); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"schema_version", "target_volume_ml", "monitored_fraction", "covered_fraction",
		"covered_fraction_of_target", "covered_fraction_p05", "covered_fraction_p95", "holes",
		"outside_margin_lethal_ml", "outside_clusters", "sonications", "threshold_cem43", "margin_mm",
		"settings", "software_version"} {
		if _, ok := m[k]; !ok {
			t.Errorf("JSON lacks %q", k)
		}
	}
}

// TestDoseMetrics: a uniform dose of 500 CEM43 over the target gives
// D98 = D50 = D2 = 500 and a DVH of 1 below 500, 0 above (ICRU Report 83
// definitions); coverage vs threshold is 1 up to 500 and 0 above.
func TestDoseMetrics(t *testing.T) {
	g := thermoGrid(32, 32, 12)
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{doseSonication(1, g, func(dosemap.Vec3) float64 { return 500 })},
		Structures:  []dosemap.Structure{sphereStructure("target", dosemap.Vec3{}, 10, 1.5, 0, 64, dosemap.RoleTarget)},
	}
	r := analyseCase(t, c, DefaultSettings())
	for _, d := range []*float64{r.D98, r.D50, r.D2} {
		if d == nil || math.Abs(*d-500) > 1e-3*500 {
			t.Errorf("D = %v, want 500", d)
		}
	}
	for n, d := range r.DVH.Dose {
		want := 0.0
		if d < 499 {
			want = 1
		} else if d < 501 {
			continue
		}
		if r.DVH.Target[n] != want {
			t.Errorf("DVH(%g) = %g, want %g", d, r.DVH.Target[n], want)
		}
	}
	for _, p := range r.CoverageVsThreshold {
		if (p.Threshold < 499 && fracOf(p.CoveredFraction) != 1) || (p.Threshold > 501 && fracOf(p.CoveredFraction) != 0) {
			t.Errorf("coverage at %g = %s", p.Threshold, ptrString(p.CoveredFraction))
		}
	}
}

// TestLinearDoseD98: dose rising linearly along x across a box target
// makes Dx the dose at the x where (100-x) % of the box lies below it.
func TestLinearDoseD98(t *testing.T) {
	g := thermoGrid(40, 40, 8)
	var s dosemap.Structure
	s.Name, s.Role = "box", dosemap.RoleTarget
	for z := -6.0; z <= 6; z += 1.5 {
		s.Contours = append(s.Contours, dosemap.Contour{Points: []dosemap.Vec3{{-10, -5, z}, {10, -5, z}, {10, 5, z}, {-10, 5, z}}})
	}
	// Dose 240 + 10·(x − 3.75): 102.5 at x = −10, 302.5 at x = +10;
	// 240 CEM43 on the voxel boundary x = 3.75 mm.
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{doseSonication(1, g, func(p dosemap.Vec3) float64 { return 240 + 10*(p[0]-3.75) })},
		Structures:  []dosemap.Structure{s},
	}
	r := analyseCase(t, c, DefaultSettings())
	// Dx: x % of the volume receives at least Dx, so Dx = 302.5 − 200·x/100
	// (computed). Tolerance: the dose step of one 1.25 mm voxel, 12.5 CEM43
	// (a quantile of voxel doses resolves one voxel).
	for _, tc := range []struct {
		d    *float64
		want float64
	}{{r.D98, 106.5}, {r.D50, 202.5}, {r.D2, 298.5}} {
		if tc.d == nil || math.Abs(*tc.d-tc.want) > 12.5 {
			t.Errorf("Dx = %v, want %g", ptrString(tc.d), tc.want)
		}
	}
	// Lethal for x >= 3.75: covered fraction 6.25/20 = 0.3125 (computed).
	if math.Abs((*r.CoveredFraction)-0.3125) > 1e-6 {
		t.Errorf("covered %.6f, want 0.3125", (*r.CoveredFraction))
	}
}

func TestAnalyzeErrors(t *testing.T) {
	g := thermoGrid(8, 8, 2)
	son := doseSonication(1, g, func(dosemap.Vec3) float64 { return 1 })
	tgt := sphereStructure("target", dosemap.Vec3{}, 3, 1.5, 0, 32, dosemap.RoleTarget)
	ctx := context.Background()
	for _, tc := range []struct {
		name string
		c    *dosemap.Case
		set  func(*Settings)
		want string
	}{
		{"no target", &dosemap.Case{Sonications: []*dosemap.Sonication{son}}, nil, "no target"},
		{"no sonication", &dosemap.Case{Structures: []dosemap.Structure{tgt}}, nil, "no sonication"},
		{"bad threshold", &dosemap.Case{Sonications: []*dosemap.Sonication{son}, Structures: []dosemap.Structure{tgt}}, func(s *Settings) { s.Threshold = -1 }, "threshold"},
		{"bad model", &dosemap.Case{Sonications: []*dosemap.Sonication{son}, Structures: []dosemap.Structure{tgt}}, func(s *Settings) { s.Model = "x" }, `model "x": want cem43 or arrhenius`},
		{"all excluded", &dosemap.Case{Sonications: []*dosemap.Sonication{son}, Structures: []dosemap.Structure{tgt}}, func(s *Settings) { s.Excluded = []int{1} }, "every sonication"},
		{"unknown excluded", &dosemap.Case{Sonications: []*dosemap.Sonication{son}, Structures: []dosemap.Structure{tgt}}, func(s *Settings) { s.Excluded = []int{7} }, "does not exist"},
		{"huge margin", &dosemap.Case{Sonications: []*dosemap.Sonication{son}, Structures: []dosemap.Structure{tgt}}, func(s *Settings) { s.MarginMM = 1e9 }, ""},
	} {
		set := DefaultSettings()
		if tc.set != nil {
			tc.set(&set)
		}
		_, err := Analyze(ctx, tc.c, set, nil)
		if tc.want == "" {
			continue // must not crash; may succeed
		}
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want %q", tc.name, err, tc.want)
		}
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := Analyze(cctx, &dosemap.Case{Sonications: []*dosemap.Sonication{son}, Structures: []dosemap.Structure{tgt}}, DefaultSettings(), nil); err == nil {
		t.Error("cancelled context: no error")
	}
}

// TestTemperatureStats: hottest voxel 57 °C in frame 2, its 3x3 mean
// (57 + 8·50)/9 = 50.78 (computed); above 43 °C in frames 1..3 of 3 s
// each = 9 s.
func TestTemperatureStats(t *testing.T) {
	g := dosemap.NewAxialGeometry(5, 5, 1, dosemap.Vec3{1, 1, 3}, dosemap.Vec3{})
	frames := make([][]float32, 5)
	for f := range frames {
		frames[f] = make([]float32, g.Len())
		for v := range frames[f] {
			frames[f][v] = 37
		}
	}
	c := g.Index(2, 2, 0)
	for f, tc := range []float32{38, 45, 57, 44, 40} {
		frames[f][c] = tc
	}
	for dj := -1; dj <= 1; dj++ {
		for di := -1; di <= 1; di++ {
			if di != 0 || dj != 0 {
				frames[2][g.Index(2+di, 2+dj, 0)] = 50
			}
		}
	}
	frames[3][0] = float32(math.NaN())
	// Each frame's hottest voxel, as the thermometry records it (the first
	// of the largest valid values).
	hottest := make([]int, len(frames))
	for f, fr := range frames {
		hottest[f] = -1
		for v, x := range fr {
			if x == x && (hottest[f] < 0 || x > fr[hottest[f]]) {
				hottest[f] = v
			}
		}
	}
	ts := temperatureStats(g, []float64{0, 3, 6, 9, 12}, frames, hottest)
	if ts.peak != 57 || math.Abs(ts.peak3-(57+8*50)/9.0) > 1e-4 || ts.above43 != 9 {
		t.Errorf("stats %+v", ts)
	}
}

func ptrString(p *float64) string {
	if p == nil {
		return "nil"
	}
	return strconv.FormatFloat(*p, 'g', 6, 64)
}

// TestWriteText: the summary states the threshold, the margin, the
// covered fraction and the cautions.
func TestWriteText(t *testing.T) {
	g := thermoGrid(48, 48, 14)
	c := &dosemap.Case{Label: "phantom",
		Sonications: []*dosemap.Sonication{doseSonication(1, g, ballDose(dosemap.Vec3{}, 9, 1)), doseSonication(2, g, ballDose(dosemap.Vec3{17, 0, 0}, 3, 1))},
		Structures:  []dosemap.Structure{sphereStructure("target", dosemap.Vec3{}, 10, 1.5, 0, 64, dosemap.RoleTarget)},
	}
	r := analyseCase(t, c, DefaultSettings())
	var b strings.Builder
	if err := r.WriteText(&b); err != nil {
		t.Fatal(err)
	}
	out := b.String()
	for _, want := range []string{"threshold 240 CEM43", "margin 3 mm", fmt.Sprintf("%.1f %% of the monitored target", 100*(*r.CoveredFraction)),
		"mostly sonication 2", "not a treatment planning", "Holes (monitored target below threshold): 1"} {
		if !strings.Contains(out, want) {
			t.Errorf("summary lacks %q:\n%s", want, out)
		}
	}
	t.Log(out)
}

// TestAvoidDose: an avoid sphere r = 3 mm at (14, 0, 0) and a lethal ball
// r = 4 mm at (17, 0, 0) overlap in a lens of π·4²·48/36 = 67.0 mm³
// (lensVolume, computed); measured within 25 % (a 3 mm sphere spans about
// five 1.25 mm voxels). The peak dose inside lies at the avoid voxel
// nearest the dose centre, within one voxel of (16.5, 0, 0).
func TestAvoidDose(t *testing.T) {
	g := thermoGrid(48, 48, 12)
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{doseSonication(1, g, ballDose(dosemap.Vec3{17, 0, 0}, 4, 1))},
		Structures: []dosemap.Structure{
			sphereStructure("target", dosemap.Vec3{}, 8, 1.5, 0, 64, dosemap.RoleTarget),
			sphereStructure("nerve", dosemap.Vec3{14, 0, 0}, 3, 1, 0.5, 64, dosemap.RoleAvoid),
		},
	}
	r := analyseCase(t, c, DefaultSettings())
	if len(r.Avoid) != 1 {
		t.Fatalf("avoid %+v", r.Avoid)
	}
	a := r.Avoid[0]
	want := lensVolume(4, 3, 3)
	if math.Abs(want-67.02) > 0.01 {
		t.Fatalf("lens %.2f", want)
	}
	if math.Abs(a.LethalVolumeMM3-want) > 0.25*want {
		t.Errorf("lethal in avoid %.1f mm³, want %.1f", a.LethalVolumeMM3, want)
	}
	if v := 4.0 / 3 * math.Pi * 27 / 1000; math.Abs(a.VolumeML-v) > 0.05*v || fracOf(a.MonitoredFraction) != 1 {
		t.Errorf("avoid volume %.4f mL (want %.4f), monitored %s", a.VolumeML, v, ptrString(a.MonitoredFraction))
	}
	if a.PeakMM == nil || dosemap.Vec3(*a.PeakMM).Sub(dosemap.Vec3{16.5, 0, 0}).Norm() > 1.3 || a.PeakDose == nil {
		t.Errorf("peak %v at %v", ptrString(a.PeakDose), a.PeakMM)
	}
}

// TestPreparedSettings: a session re-analyses with settings whose model
// parameters are left zero (the defaults) but refuses other parameters.
func TestPreparedSettings(t *testing.T) {
	g := thermoGrid(16, 16, 4)
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{doseSonication(1, g, ballDose(dosemap.Vec3{}, 3, 1))},
		Structures:  []dosemap.Structure{sphereStructure("target", dosemap.Vec3{}, 4, 1.5, 0, 32, dosemap.RoleTarget)},
	}
	ses, err := Prepare(context.Background(), c, DefaultSettings(), nil)
	if err != nil {
		t.Fatal(err)
	}
	zero := Settings{Threshold: 240, MarginMM: 3, Model: "cem43"}
	if _, err := ses.Analyze(context.Background(), zero, nil); err != nil {
		t.Errorf("zero parameters: %v", err)
	}
	other := DefaultSettings()
	other.CEM43.RBelow = 0.3
	if _, err := ses.Analyze(context.Background(), other, nil); err == nil || !strings.Contains(err.Error(), "prepare it again") {
		t.Errorf("changed CEM43 parameters: %v", err)
	}
}

// TestTargetOutsideThermometry: contours 500 mm away from the thermometry
// (another frame of reference, say) are an error naming the problem.
func TestTargetOutsideThermometry(t *testing.T) {
	g := thermoGrid(16, 16, 4)
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{doseSonication(1, g, ballDose(dosemap.Vec3{}, 3, 1))},
		Structures:  []dosemap.Structure{sphereStructure("target", dosemap.Vec3{0, 0, 500}, 4, 1.5, 0, 32, dosemap.RoleTarget)},
	}
	_, err := Analyze(context.Background(), c, DefaultSettings(), nil)
	if err == nil || !strings.Contains(err.Error(), "outside the thermometry") {
		t.Errorf("error %v", err)
	}
}

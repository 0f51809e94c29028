package view

import (
	"image"
	"image/color"
	"math"
	"testing"

	"dosecover/dosemap"
)

// TestRenderLayers checks the compositing arithmetic on uniform inputs:
// anatomy alone is the window's grey; a dose below the floor leaves it
// unchanged; a dose above the ceiling blends the top viridis colour with
// the scale's opacity (source-over, computed); NaN dose adds nothing.
// Tolerance: 1 level (integer rounding of the blend).
func TestRenderLayers(t *testing.T) {
	g := dosemap.NewAxialGeometry(20, 20, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	anat := dosemap.NewVolume(g).Fill(100)
	win := Window{Center: 100.5, Width: 201} // 100 -> ((100-100)/200+0.5)*255 = 127.5
	p := AcquisitionPlane(g, 0)
	v := FitView(p, 40, 40)
	sc := DoseScale{Floor: 1, Ceiling: 1000, Opacity: 0.4}
	grey := float64(win.Grey(100))
	top := Colormap(1)
	for _, c := range []struct {
		name string
		dose float32
		want [3]float64
	}{
		{"below floor", 0.5, [3]float64{grey, grey, grey}},
		{"above ceiling", 5000, [3]float64{
			0.4*float64(top.R) + 0.6*grey, 0.4*float64(top.G) + 0.6*grey, 0.4*float64(top.B) + 0.6*grey}},
		{"NaN", float32(math.NaN()), [3]float64{grey, grey, grey}},
	} {
		s := &Scene{Plane: p, Anatomy: anat, Window: win, Dose: dosemap.NewVolume(g).Fill(c.dose), Scale: sc}
		img, err := Render(s, v)
		if err != nil {
			t.Fatal(err)
		}
		px := img.RGBAAt(20, 20)
		got := [3]float64{float64(px.R), float64(px.G), float64(px.B)}
		for n := range got {
			if math.Abs(got[n]-c.want[n]) > 1 {
				t.Errorf("%s: pixel %v, want %v (±1)", c.name, px, c.want)
				break
			}
		}
	}
	// Invalid inputs are errors, not panics.
	if _, err := Render(&Scene{Plane: Plane{}}, v); err == nil {
		t.Error("Render accepted an empty plane")
	}
	if _, err := Render(&Scene{Plane: p}, View{Width: 10, Height: 10}); err == nil {
		t.Error("Render accepted a zero zoom")
	}
	if _, err := Render(&Scene{Plane: p, Scale: DoseScale{Floor: 10, Ceiling: 1}}, v); err == nil {
		t.Error("Render accepted an inverted dose scale")
	}
}

// TestRendererCache: a Renderer reused across pans, zooms and plane
// changes gives the same pixels as a fresh one.
func TestRendererCache(t *testing.T) {
	ph := testPhantom()
	r := NewRenderer()
	ga := ph.anatomy.Geometry
	var buf *image.RGBA
	for n, k := range []int{20, 20, 21, 20} {
		p := AcquisitionPlane(ga, k)
		s := ph.scene(p)
		v := FitView(p, 200, 160).ZoomAt(p, 100, 80, 1+float64(n)).Pan(p, float64(7*n), -3)
		var err error
		buf, err = r.Render(s, v, buf)
		if err != nil {
			t.Fatal(err)
		}
		fresh, err := Render(s, v)
		if err != nil {
			t.Fatal(err)
		}
		if err := compareImages(buf, fresh, 0, 0); err != nil {
			t.Errorf("step %d: cached render differs from a fresh one: %v", n, err)
		}
	}
}

// TestRenderSpillFill: a spill mask voxel shows the spill colour at the
// fill opacity, and pixels outside it do not.
func TestRenderSpillFill(t *testing.T) {
	g := dosemap.NewAxialGeometry(21, 21, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{-10, -10, 0})
	m := make([]bool, g.Len())
	for j := 8; j <= 12; j++ {
		for i := 8; i <= 12; i++ {
			m[g.Index(i, j, 0)] = true
		}
	}
	spill, err := MaskRegion(g, m)
	if err != nil {
		t.Fatal(err)
	}
	p := AcquisitionPlane(g, 0)
	s := &Scene{Plane: p, Anatomy: dosemap.NewVolume(g), Window: Window{0.5, 1}, Spill: spill}
	img, err := Render(s, FitView(p, 210, 210))
	if err != nil {
		t.Fatal(err)
	}
	a := DefaultStyle().FillOpacity
	want := color.RGBA{uint8(a*float64(ColorSpill.R) + 0.5), uint8(a*float64(ColorSpill.G) + 0.5), uint8(a*float64(ColorSpill.B) + 0.5), 255}
	if got := img.RGBAAt(105, 105); absDiff(got.R, want.R) > 1 || absDiff(got.G, want.G) > 1 || absDiff(got.B, want.B) > 1 {
		t.Errorf("inside the spill: %v, want %v", got, want)
	}
	if got := img.RGBAAt(20, 20); got.R != 0 || got.G != 0 || got.B != 0 {
		t.Errorf("outside the spill: %v, want black anatomy", got)
	}
	if _, err := MaskRegion(g, m[:10]); err == nil {
		t.Error("MaskRegion accepted a mask of the wrong length")
	}
}

func absDiff(a, b uint8) int {
	if a > b {
		return int(a - b)
	}
	return int(b - a)
}

// TestStructureOutlines intersects a sphere of radius 12 mm given as
// circular contours every 2 mm with planes. On an axial plane lying in a
// contour plane the outline is that contour itself (vertices exact to
// 1e-9 mm). On a coronal and an oblique plane through the centre the
// outline of the rasterised slabs follows the circle of radius 12 mm
// within 1.2 mm: each contour stands for a 2 mm slab (±1 mm), so at the
// poles the outline can be off by the slab half-thickness plus half a
// 1 mm pixel (computed from the slab rule).
func TestStructureOutlines(t *testing.T) {
	ph := testPhantom()
	g := ph.anatomy.Geometry
	st := Region{Structure: &ph.target}
	// Axial through z = 4: contour radius sqrt(144-16).
	p := AcquisitionPlane(g, 22)
	lines := RegionOutlines(p, st)
	if len(lines) != 1 || !lines[0].Closed || len(lines[0].Pixels) != 64 {
		t.Fatalf("axial: %d outlines, want the one 64-point contour", len(lines))
	}
	want := math.Sqrt(144 - 16)
	for _, q := range lines[0].Patient {
		if math.Abs(math.Hypot(q[0], q[1])-want) > 1e-9 || math.Abs(q[2]-4) > 1e-9 {
			t.Fatalf("axial vertex %v not on the contour of radius %g at z = 4", q, want)
		}
	}
	a := 35 * math.Pi / 180
	obl, err := ObliquePlane(g, dosemap.Vec3{}, dosemap.Vec3{1, 0, 0}, dosemap.Vec3{0, math.Cos(a), math.Sin(a)}, 1)
	if err != nil {
		t.Fatal(err)
	}
	for name, p := range map[string]Plane{
		"coronal": PlaneThrough(g, RowNormal, dosemap.Vec3{}, 1),
		"oblique": obl,
	} {
		lines := RegionOutlines(p, st)
		if len(lines) != 1 || !lines[0].Closed {
			t.Fatalf("%s: %d outlines, want one closed", name, len(lines))
		}
		for _, q := range lines[0].Patient {
			if d := math.Abs(q.Norm() - 12); d > 1.2 {
				t.Errorf("%s: outline vertex %v is %.2f mm off the sphere (tolerance 1.2)", name, q, d)
				break
			}
		}
	}
	// A plane missing the structure has no outline.
	if n := len(RegionOutlines(AcquisitionPlane(g, 35), st)); n != 0 {
		t.Errorf("plane at z = 30 mm: %d outlines of a sphere of radius 12", n)
	}
}

// TestLabelMasks: a label volume (region numbers 1, 2, 3) and a mask with
// NaN outline the same region as the equivalent 0/1 mask, as Region
// documents; and NearestSlice picks the slice through a point.
func TestLabelMasks(t *testing.T) {
	g := dosemap.NewAxialGeometry(30, 30, 3, dosemap.Vec3{1, 1, 2}, dosemap.Vec3{-15, -15, -2})
	bin, lab, nan := dosemap.NewVolume(g), dosemap.NewVolume(g), dosemap.NewVolume(g)
	for n := range bin.Data {
		i, j, _ := g.IJK(n)
		if i >= 5 && i < 20 && j >= 8 && j < 18 {
			bin.Data[n] = 1
			lab.Data[n] = float32(1 + i%3)
			nan.Data[n] = 1
		} else if i > 25 {
			nan.Data[n] = float32(math.NaN())
		}
	}
	p := AcquisitionPlane(g, NearestSlice(g, dosemap.Vec3{0, 0, 0.3}))
	if d := p.Distance(dosemap.Vec3{0, 0, 0}); d != 0 {
		t.Fatalf("NearestSlice: plane at %g mm from z = 0", d)
	}
	want := RegionOutlines(p, Region{Mask: bin})
	if len(want) != 1 {
		t.Fatalf("0/1 mask: %d outlines, want 1", len(want))
	}
	for name, m := range map[string]*dosemap.Volume{"labels": lab, "NaN": nan} {
		got := RegionOutlines(p, Region{Mask: m})
		if len(got) != 1 || len(got[0].Pixels) != len(want[0].Pixels) {
			t.Fatalf("%s: %d outlines, want the 0/1 mask's", name, len(got))
		}
		for n := range got[0].Pixels {
			if got[0].Pixels[n] != want[0].Pixels[n] {
				t.Fatalf("%s: vertex %d at %v, 0/1 mask's at %v", name, n, got[0].Pixels[n], want[0].Pixels[n])
			}
		}
	}
}

// TestLevelLine: a further isoline of a volume (here r² at 100 mm², a
// circle of 10 mm) is drawn in its colour on the circle and nowhere near
// the centre.
func TestLevelLine(t *testing.T) {
	g := dosemap.NewAxialGeometry(41, 41, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{-20, -20, 0})
	f := dosemap.NewVolume(g)
	for n := range f.Data {
		i, j, _ := g.IJK(n)
		q := g.Point(float64(i), float64(j), 0)
		f.Data[n] = float32(q[0]*q[0] + q[1]*q[1])
	}
	p := AcquisitionPlane(g, 0)
	col := color.RGBA{0x10, 0xE0, 0x30, 0xFF}
	s := &Scene{Plane: p, Lines: []LevelLine{{Volume: f, Level: 100, Color: col, Width: 3}}}
	v := FitView(p, 410, 410) // 10 display pixels per mm
	img, err := Render(s, v)
	if err != nil {
		t.Fatal(err)
	}
	for _, a := range []float64{0, 1, 2, 3, 4, 5} {
		x, y := v.ToDisplay(p, func() Point { x, y := p.Pixel(dosemap.Vec3{10 * math.Cos(a), 10 * math.Sin(a), 0}); return Point{x, y} }())
		if got := img.RGBAAt(int(x), int(y)); absDiff(got.G, col.G) > 40 || absDiff(got.R, col.R) > 40 {
			t.Errorf("angle %g: pixel %v on the circle, want about %v", a, got, col)
		}
	}
	cx, cy := v.ToDisplay(p, Point{20, 20})
	if got := img.RGBAAt(int(cx), int(cy)); got.G > 30 {
		t.Errorf("centre pixel %v, want background", got)
	}
}

// TestRenderOddInputs: malformed or degenerate inputs render (possibly
// empty) pictures without panicking: a volume whose data does not match its
// grid, structures with too few or collinear points, a plane far from
// every volume, one-pixel views, extreme zoom and a one-voxel volume.
func TestRenderOddInputs(t *testing.T) {
	g := dosemap.NewAxialGeometry(10, 10, 2, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	bad := &dosemap.Volume{Geometry: g, Data: make([]float32, 7)}
	tiny := dosemap.NewVolume(dosemap.NewAxialGeometry(1, 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})).Fill(300)
	odd := &dosemap.Structure{Contours: []dosemap.Contour{
		{Points: []dosemap.Vec3{{0, 0, 0}, {1, 0, 0}}},
		{Points: []dosemap.Vec3{{0, 0, 0}, {1, 1, 0}, {2, 2, 0}}},
		{},
	}}
	p := AcquisitionPlane(g, 0)
	far := p
	far.Origin = dosemap.Vec3{0, 0, 1e4}
	for _, c := range []struct {
		name string
		s    Scene
		v    View
	}{
		{"bad volumes", Scene{Plane: p, Anatomy: bad, Dose: bad, Lethal: 240, Margin: Region{Mask: bad}}, FitView(p, 50, 50)},
		{"odd structure", Scene{Plane: p, Target: Region{Structure: odd}, Avoid: []Region{{Structure: &dosemap.Structure{}}}}, FitView(p, 50, 50)},
		{"far plane", Scene{Plane: far, Anatomy: tiny, Dose: tiny, Lethal: 240, Annotations: true}, FitView(far, 64, 64)},
		{"one pixel", Scene{Plane: p, Anatomy: tiny, Annotations: true, Caption: "x"}, FitView(p, 1, 1)},
		{"extreme zoom", Scene{Plane: p, Anatomy: tiny, Dose: tiny, Lethal: 100, Annotations: true}, FitView(p, 64, 64).ZoomAt(p, 3, 3, 1e5)},
		{"one voxel", Scene{Plane: AcquisitionPlane(tiny.Geometry, 0), Anatomy: tiny, Dose: tiny, Lethal: 100, Target: Region{Mask: tiny}}, FitView(AcquisitionPlane(tiny.Geometry, 0), 32, 32)},
	} {
		img, err := Render(&c.s, c.v)
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		if img.Rect.Dx() != c.v.Width || img.Rect.Dy() != c.v.Height {
			t.Errorf("%s: image %v for a %d×%d view", c.name, img.Rect, c.v.Width, c.v.Height)
		}
	}
}

package view_test

import (
	"fmt"
	"math"

	"dosecover/dosemap"
	"dosecover/review/view"
)

// An axial stack reformatted through a point: the coronal plane keeps the
// patient's left on the right and inferior at the bottom.
func ExamplePlaneThrough() {
	g := dosemap.NewAxialGeometry(128, 128, 20, dosemap.Vec3{1.5, 1.5, 3}, dosemap.Vec3{-95.25, -95.25, -28.5})
	p := view.PlaneThrough(g, view.RowNormal, dosemap.Vec3{0, 10, 0}, 0)
	fmt.Printf("%d×%d pixels of %.1f mm\n", p.Width, p.Height, p.PixelU)
	fmt.Println("right edge:", view.OrientationLabel(p.U, 1), "bottom edge:", view.OrientationLabel(p.V, 1))
	x, y := p.Pixel(dosemap.Vec3{0, 10, 0})
	fmt.Printf("the point is at pixel (%.1f, %.1f)\n", x, y)
	// Output:
	// 128×41 pixels of 1.5 mm
	// right edge: L bottom edge: I
	// the point is at pixel (63.5, 20.0)
}

// Sampling a volume on its own acquisition plane returns the slice.
func ExampleSample() {
	g := dosemap.NewAxialGeometry(3, 2, 2, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	v := dosemap.NewVolume(g)
	for n := range v.Data {
		v.Data[n] = float32(n)
	}
	fmt.Println(view.Sample(v, view.AcquisitionPlane(g, 1)))
	// Output:
	// [6 7 8 9 10 11]
}

// The 240 CEM43 isoline of a radially symmetric dose is a closed circle.
func ExampleMarchingSquares() {
	const w, h = 64, 64
	dose := make([]float32, w*h)
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			r2 := math.Pow(float64(x)-31.5, 2) + math.Pow(float64(y)-31.5, 2)
			dose[y*w+x] = float32(4000 * math.Exp(-r2/(2*8*8)))
		}
	}
	lines := view.MarchingSquares(dose, w, h, 240)
	q := lines[0].Pixels[0]
	fmt.Printf("%d line, closed %v, radius %.1f px (exact %.1f)\n", len(lines), lines[0].Closed,
		math.Hypot(q.X-31.5, q.Y-31.5), 8*math.Sqrt(2*math.Log(4000.0/240)))
	// Output:
	// 1 line, closed true, radius 19.0 px (exact 19.0)
}

// The DICOM linear VOI LUT maps the window onto grey levels.
func ExampleWindow_Grey() {
	w := view.Window{Center: 40, Width: 400}
	fmt.Println(w.Grey(-200), w.Grey(40), w.Grey(300))
	// Output:
	// 0 128 255
}

// Rendering a scene: anatomy, dose wash, lethal isoline and target.
func ExampleRender() {
	g := dosemap.NewAxialGeometry(64, 64, 1, dosemap.Vec3{1, 1, 3}, dosemap.Vec3{-31.5, -31.5, 0})
	anat := dosemap.NewVolume(g).Fill(500)
	dose := dosemap.NewVolume(g)
	target := make([]bool, g.Len())
	for n := range dose.Data {
		i, j, _ := g.IJK(n)
		p := g.Point(float64(i), float64(j), 0)
		dose.Data[n] = float32(3000 * math.Exp(-(p[0]*p[0]+p[1]*p[1])/50))
		target[n] = math.Hypot(p[0], p[1]) <= 10
	}
	tgt, err := view.MaskRegion(g, target)
	if err != nil {
		fmt.Println(err)
		return
	}
	p := view.AcquisitionPlane(g, 0)
	s := &view.Scene{
		Plane: p, Anatomy: anat, Window: view.Window{Center: 500, Width: 1000},
		Dose: dose, Scale: view.DefaultDoseScale(), Lethal: 240,
		Target: tgt, Annotations: true,
	}
	img, err := view.Render(s, view.FitView(p, 256, 256))
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(img.Bounds())
	// Output:
	// (0,0)-(256,256)
}

// Zooming about the cursor keeps the point under it in place.
func ExampleView_ZoomAt() {
	g := dosemap.NewAxialGeometry(100, 100, 1, dosemap.Vec3{2, 2, 2}, dosemap.Vec3{})
	p := view.AcquisitionPlane(g, 0)
	v := view.FitView(p, 400, 400)
	before := v.ToPlane(p, 100, 300)
	v = v.ZoomAt(p, 100, 300, 4)
	after := v.ToPlane(p, 100, 300)
	fmt.Printf("zoom %.0f px/mm; point (%.2f, %.2f) -> (%.2f, %.2f)\n", v.Zoom, before.X, before.Y, after.X, after.Y)
	// Output:
	// zoom 8 px/mm; point (24.50, 74.50) -> (24.50, 74.50)
}

// A colour bar for the dose wash, with the lethal level marked.
func ExampleColorBar() {
	img, err := view.ColorBar(view.DefaultDoseScale(), 240, 120, 360)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(img.Bounds().Dx(), img.Bounds().Dy())
	// Output:
	// 120 360
}

// The outline of a target structure on the plane of one of its contours
// is that contour; on other planes the structure is cut slab by slab.
func ExampleRegionOutlines() {
	target := &dosemap.Structure{Name: "Target", Role: dosemap.RoleTarget}
	for _, z := range []float64{-3, 0, 3} {
		var c dosemap.Contour
		for a := 0; a < 32; a++ {
			t := 2 * math.Pi * float64(a) / 32
			c.Points = append(c.Points, dosemap.Vec3{8 * math.Cos(t), 8 * math.Sin(t), z})
		}
		target.Contours = append(target.Contours, c)
	}
	g := dosemap.NewAxialGeometry(40, 40, 3, dosemap.Vec3{1, 1, 3}, dosemap.Vec3{-19.5, -19.5, -3})
	axial := view.RegionOutlines(view.AcquisitionPlane(g, 1), view.Region{Structure: target})
	fmt.Println("axial:", len(axial), "outline of", len(axial[0].Pixels), "points")
	coronal := view.RegionOutlines(view.PlaneThrough(g, view.RowNormal, dosemap.Vec3{}, 0.5), view.Region{Structure: target})
	fmt.Println("coronal:", len(coronal), "outline, closed:", coronal[0].Closed)
	// Output:
	// axial: 1 outline of 32 points
	// coronal: 1 outline, closed: true
}

// Isolines traced on a plane come in patient millimetres too.
func ExamplePlane_Isolines() {
	g := dosemap.NewAxialGeometry(41, 41, 1, dosemap.Vec3{0.5, 0.5, 1}, dosemap.Vec3{-10, -10, 5})
	v := dosemap.NewVolume(g)
	for n := range v.Data {
		i, j, _ := g.IJK(n)
		q := g.Point(float64(i), float64(j), 0)
		v.Data[n] = float32(q[0]*q[0] + q[1]*q[1]) // r² in mm²
	}
	p := view.AcquisitionPlane(g, 0)
	lines := p.Isolines(view.Sample(v, p), 36) // r = 6 mm
	q := lines[0].Patient[0]
	fmt.Printf("closed %v, |p| = %.2f mm at z = %.0f mm\n", lines[0].Closed, math.Hypot(q[0], q[1]), q[2])
	// Output:
	// closed true, |p| = 6.00 mm at z = 5 mm
}

// The overlay key shows each overlay's colour with its line style or fill.
func ExampleOverlayKey() {
	img := view.OverlayKey(view.DefaultStyle(), 260)
	fmt.Println(img.Bounds().Dx() == 260, img.Bounds().Dy() > 100)
	// Output:
	// true true
}

package view

import (
	"math"
	"testing"

	"dosecover/dosemap"
)

// TestWindowLinearVOI checks Window.Grey against DICOM PS3.3 C.11.2.1.2.1
// (VOI LUT Function LINEAR) evaluated by hand with ymin = 0, ymax = 255:
// for c = 100, w = 201 the ramp runs from x = c - 0.5 - (w-1)/2 = -0.5
// (output 0 at and below) to x = c - 0.5 + (w-1)/2 = 199.5 (255 above), and
// x = c - 0.5 = 99.5 gives 127.5. For c = 40, w = 400 (a common soft-tissue
// CT window, common practice), x = 40 gives ((0.5/399) + 0.5)·255 =
// 127.82. Tolerance: half an output level (rounding to uint8).
func TestWindowLinearVOI(t *testing.T) {
	for _, c := range []struct {
		win  Window
		x    float64
		want float64
	}{
		{Window{100, 201}, -0.5, 0},
		{Window{100, 201}, -100, 0},
		{Window{100, 201}, 99.5, 127.5},
		{Window{100, 201}, 199.5, 255},
		{Window{100, 201}, 1000, 255},
		{Window{100, 201}, 49.5, 63.75},
		{Window{40, 400}, 40, (0.5/399 + 0.5) * 255},
		{Window{40, 400}, -159.5, (-199.5/399 + 0.5) * 255},
		{Window{40, 400}, math.NaN(), 0},
	} {
		got := float64(c.win.Grey(c.x))
		if math.Abs(got-c.want) > 0.5+1e-9 {
			t.Errorf("window %+v at %g: %g, want %.3f (±0.5)", c.win, c.x, got, c.want)
		}
	}
	// Width 1: a threshold at c - 0.5 (PS3.3 C.11.2.1.2.1 requires w >= 1).
	w := Window{10, 1}
	if w.Grey(9.4) != 0 || w.Grey(9.6) != 255 {
		t.Errorf("width 1 window: %d at 9.4, %d at 9.6; want 0 and 255", w.Grey(9.4), w.Grey(9.6))
	}
}

// TestAutoWindow: for values uniform on 0..999 the 1st and 99th
// percentiles are 10 and 989 (computed), which the window maps to 0 and
// 255 (C.11.2.1.2.1 inverted).
func TestAutoWindow(t *testing.T) {
	v := dosemap.NewVolume(dosemap.NewAxialGeometry(1000, 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{}))
	for n := range v.Data {
		v.Data[n] = float32(n)
	}
	v.Data[5] = float32(math.NaN())
	w := AutoWindow(v)
	if g := w.Grey(9); g != 0 {
		t.Errorf("below 1st percentile: grey %d, want 0", g)
	}
	if g := w.Grey(990); g != 255 {
		t.Errorf("above 99th percentile: grey %d, want 255", g)
	}
	if g := w.Grey(500); g < 120 || g > 135 {
		t.Errorf("median: grey %d, want about 128", g)
	}
}

// TestDoseScale checks the log scale: t = log10(D/floor)/log10(ceil/floor)
// (computed): 1..1000 CEM43 puts 10 at 1/3, 100 at 2/3 and 240 at
// log10(240)/3 = 0.79340; below the floor or NaN is -1; Dose inverts T.
func TestDoseScale(t *testing.T) {
	s := DoseScale{Floor: 1, Ceiling: 1000, Opacity: 0.5}
	for _, c := range []struct{ d, t float64 }{
		{1, 0}, {10, 1.0 / 3}, {100, 2.0 / 3}, {240, 0.79340}, {1000, 1}, {5000, 1}, {0.5, -1}, {math.NaN(), -1},
	} {
		if got := s.T(c.d); math.Abs(got-c.t) > 1e-5 {
			t.Errorf("T(%g) = %g, want %g", c.d, got, c.t)
		}
	}
	for _, d := range []float64{1, 3, 240, 999} {
		if got := s.Dose(s.T(d)); math.Abs(got-d) > 1e-9*d {
			t.Errorf("Dose(T(%g)) = %g", d, got)
		}
	}
	for _, bad := range []DoseScale{{0, 10, 0.5}, {10, 10, 0.5}, {1, 10, 1.5}, {-1, 10, 0.5}} {
		if bad.Validate() == nil {
			t.Errorf("Validate accepted %+v", bad)
		}
	}
}

// TestColormapViridis checks Colormap at its control points against the
// matplotlib viridis table (van der Walt, Smith & Firing 2015; entries 0,
// 128 and 255: #440154, #21918c, #fde725, from the published colour map
// data) and that its lightness (Rec. 709 luma, a proxy) rises
// monotonically, the property that makes the wash readable in grey.
func TestColormapViridis(t *testing.T) {
	for _, c := range []struct {
		t       float64
		r, g, b uint8
	}{
		{0, 0x44, 0x01, 0x54}, {128.0 / 255, 0x21, 0x91, 0x8c}, {1, 0xfd, 0xe7, 0x25},
	} {
		got := Colormap(c.t)
		if got.R != c.r || got.G != c.g || got.B != c.b {
			t.Errorf("Colormap(%.4f) = %v, want #%02x%02x%02x", c.t, got, c.r, c.g, c.b)
		}
	}
	prev := -1.0
	for n := 0; n <= 100; n++ {
		c := Colormap(float64(n) / 100)
		y := 0.2126*float64(c.R) + 0.7152*float64(c.G) + 0.0722*float64(c.B)
		if y < prev-0.5 {
			t.Errorf("luma falls at t=%.2f: %.1f after %.1f", float64(n)/100, y, prev)
		}
		prev = y
	}
}

// TestOrientationLabel checks the letters of DICOM PS3.3 C.7.6.1.1.1 for
// LPS directions: +x L, +y P, +z S (H in the attribute's form), with the
// dominant axis first for oblique directions.
func TestOrientationLabel(t *testing.T) {
	for _, c := range []struct {
		d      dosemap.Vec3
		n      int
		want   string
		attrib string
	}{
		{dosemap.Vec3{1, 0, 0}, 1, "L", "L"},
		{dosemap.Vec3{-1, 0, 0}, 1, "R", "R"},
		{dosemap.Vec3{0, 1, 0}, 1, "P", "P"},
		{dosemap.Vec3{0, -1, 0}, 1, "A", "A"},
		{dosemap.Vec3{0, 0, 1}, 1, "S", "H"},
		{dosemap.Vec3{0, 0, -1}, 1, "I", "F"},
		{dosemap.Vec3{0.3, -0.9, 0.1}, 1, "A", "ALH"},
		{dosemap.Vec3{0.3, -0.9, 0.1}, 3, "ALS", "ALH"},
		{dosemap.Vec3{-0.7, 0, 0.714}, 2, "SR", "HR"},
		{dosemap.Vec3{0.01, 0.0, -1}, 2, "I", "F"},
	} {
		if got := OrientationLabel(c.d, c.n); got != c.want {
			t.Errorf("OrientationLabel(%v, %d) = %q, want %q", c.d, c.n, got, c.want)
		}
		if got := PatientOrientation(c.d); got != c.attrib {
			t.Errorf("PatientOrientation(%v) = %q, want %q", c.d, got, c.attrib)
		}
	}
}

// TestViewTransform checks that ToDisplay inverts ToPlane, that ZoomAt
// keeps the point under the cursor fixed, that Pan moves the picture by
// the drag, and that DisplayPlane's pixels are the display pixels.
func TestViewTransform(t *testing.T) {
	g := dosemap.NewAxialGeometry(100, 80, 10, dosemap.Vec3{0.8, 1.2, 3}, dosemap.Vec3{-40, -48, 0})
	p := AcquisitionPlane(g, 4)
	v := FitView(p, 400, 300)
	if d := math.Min(400/(100*0.8), 300/(80*1.2)); math.Abs(v.Zoom-d) > 1e-12 {
		t.Errorf("FitView zoom %g, want %g", v.Zoom, d)
	}
	near := func(a, b float64) bool { return math.Abs(a-b) < 1e-9 }
	for _, d := range [][2]float64{{0, 0}, {17.5, 203.25}, {399, 299}} {
		q := v.ToPlane(p, d[0], d[1])
		x, y := v.ToDisplay(p, q)
		if !near(x, d[0]) || !near(y, d[1]) {
			t.Errorf("ToDisplay(ToPlane(%v)) = %g, %g", d, x, y)
		}
	}
	q := v.ToPlane(p, 120, 80)
	z := v.ZoomAt(p, 120, 80, 2.5)
	if q2 := z.ToPlane(p, 120, 80); !near(q.X, q2.X) || !near(q.Y, q2.Y) {
		t.Errorf("ZoomAt moved the point under the cursor: %v -> %v", q, q2)
	}
	if !near(z.Zoom, v.Zoom*2.5) {
		t.Errorf("ZoomAt zoom %g, want %g", z.Zoom, v.Zoom*2.5)
	}
	pan := z.Pan(p, 30, -12)
	if x, y := pan.ToDisplay(p, q); !near(x, 150) || !near(y, 68) {
		t.Errorf("after Pan(30, -12) the point is at %g, %g, want 150, 68", x, y)
	}
	dp := z.DisplayPlane(p)
	for _, d := range [][2]int{{0, 0}, {55, 12}, {399, 299}} {
		want := p.Point(z.ToPlane(p, float64(d[0])+0.5, float64(d[1])+0.5).X, z.ToPlane(p, float64(d[0])+0.5, float64(d[1])+0.5).Y)
		if got := dp.Point(float64(d[0]), float64(d[1])); got.Sub(want).Norm() > 1e-9 {
			t.Errorf("DisplayPlane pixel %v at %v, want %v", d, got, want)
		}
	}
}

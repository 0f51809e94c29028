package view

import (
	"math"
	"testing"

	"dosecover/dosemap"
)

// stackFromDICOM builds a stack's grid as DICOM PS3.3 C.7.6.2.1.1 (Image
// Plane Module) defines it: Image Orientation (Patient) gives the row
// direction (towards increasing column) and the column direction (towards
// increasing row), Image Position (Patient) the centre of the first pixel,
// Pixel Spacing the distance between rows and then between columns; the
// slice normal is row × column and slices follow each other step mm apart.
func stackFromDICOM(iop [6]float64, ipp [3]float64, cols, rows int, pixelSpacing [2]float64, slices int, step float64) dosemap.Geometry {
	row := dosemap.Vec3{iop[0], iop[1], iop[2]}
	col := dosemap.Vec3{iop[3], iop[4], iop[5]}
	return dosemap.Geometry{
		Cols: cols, Rows: rows, Slices: slices,
		Spacing: dosemap.Vec3{pixelSpacing[1], pixelSpacing[0], step},
		Origin:  dosemap.Vec3(ipp),
		Row:     row, Col: col, Normal: row.Cross(col).Unit(),
	}
}

// TestStackTrace checks the trace of a stack on a plane against
// intersections worked out by hand from the plane equations: a slice of a
// stack is the plane n·(x − IPP_k) = 0 with n = row × column (DICOM PS3.3
// C.7.6.2.1.1), its slab the points within half a slice step of the
// slices' centre planes and within half a pixel of the field of view
// (the extent dosemap.Resample takes as measured). Display planes have
// 1 mm pixels, so pixel coordinates are millimetres from their origin.
// Tolerance 1e-9 pixel: the arithmetic is exact up to rounding.
func TestStackTrace(t *testing.T) {
	c := 1 / math.Sqrt2
	// A coronal plane: rows along +x, columns towards feet (-z), 100 × 100
	// pixels of 1 mm, one slice 3 mm thick at y = 10; x from -50.5 to
	// 49.5, z from -29.5 to 70.5, y from 8.5 to 11.5.
	coronal := stackFromDICOM([6]float64{1, 0, 0, 0, 0, -1}, [3]float64{-50, 10, 70}, 100, 100, [2]float64{1, 1}, 1, 3)
	// A moving slab: three axial slices at z = 17, 20, 23 (3 mm apart),
	// 64 × 64 pixels of 1 mm from (-32, -32): slab z 15.5 to 24.5.
	slab := stackFromDICOM([6]float64{1, 0, 0, 0, 1, 0}, [3]float64{-32, -32, 17}, 64, 64, [2]float64{1, 1}, 3, 3)
	// An oblique plane tilted 45° about x: columns along (0, c, -c), so
	// the normal is (0, c, c); the first pixel at (-50, -50c, 50c) puts
	// row 50 through x = -50 on the line y = z = 0. 100 columns, 101
	// rows, one slice 2 mm thick: the plane x·n = 0 with |y + z|c ≤ 1.
	oblique := stackFromDICOM([6]float64{1, 0, 0, 0, c, -c}, [3]float64{-50, -50 * c, 50 * c}, 100, 101, [2]float64{1, 1}, 1, 2)

	axialAt := func(z float64) Plane { // pixel (x, y) at patient (x-60, y-60, z)
		return Plane{Origin: dosemap.Vec3{-60, -60, z}, U: dosemap.Vec3{1, 0, 0}, V: dosemap.Vec3{0, 1, 0}, PixelU: 1, PixelV: 1, Width: 120, Height: 120}
	}
	coronalAt := func(y float64) Plane { // pixel (x, y) at patient (x-60, y, 80-y)
		return Plane{Origin: dosemap.Vec3{-60, y, 80}, U: dosemap.Vec3{1, 0, 0}, V: dosemap.Vec3{0, 0, -1}, PixelU: 1, PixelV: 1, Width: 120, Height: 120}
	}
	sagittalAt := func(x float64) Plane { // pixel (x, y) at patient (x, x-40, 30-y)
		return Plane{Origin: dosemap.Vec3{x, -40, 30}, U: dosemap.Vec3{0, 1, 0}, V: dosemap.Vec3{0, 0, -1}, PixelU: 1, PixelV: 1, Width: 80, Height: 40}
	}
	for _, tc := range []struct {
		name   string
		stack  dosemap.Geometry
		plane  Plane
		slab   []Point // corners, any order; nil: no trace
		area   float64 // of the slab polygon, pixels²
		lines  [][2]Point
		faceOn bool
	}{
		{
			// z = 20 crosses the coronal plane edge-on: a band x -50.5..49.5,
			// y 8.5..11.5 (pixels +60), centre line y = 10.
			name: "coronal plane on axial view", stack: coronal, plane: axialAt(20),
			slab: []Point{{9.5, 68.5}, {109.5, 68.5}, {109.5, 71.5}, {9.5, 71.5}}, area: 100 * 3,
			lines: [][2]Point{{{9.5, 70}, {109.5, 70}}},
		},
		{name: "axial view above the coronal field of view", stack: coronal, plane: axialAt(80)},
		{
			// y = 11 lies inside the slab (8.5..11.5) and is parallel to it:
			// the field of view, x -50.5..49.5 and z -29.5..70.5 (pixel y =
			// 80 - z).
			name: "coronal view inside the coronal slab", stack: coronal, plane: coronalAt(11),
			slab: []Point{{9.5, 9.5}, {109.5, 9.5}, {109.5, 109.5}, {9.5, 109.5}}, area: 100 * 100, faceOn: true,
		},
		{name: "coronal view beside the coronal slab", stack: coronal, plane: coronalAt(12)},
		{
			// x = 0 crosses the slab y -32.5..31.5 (pixel x = y + 40) and z
			// 15.5..24.5 (pixel y = 30 - z); slices at z = 17, 20, 23.
			name: "moving slab on sagittal view", stack: slab, plane: sagittalAt(0),
			slab: []Point{{7.5, 5.5}, {71.5, 5.5}, {71.5, 14.5}, {7.5, 14.5}}, area: 64 * 9,
			lines: [][2]Point{{{7.5, 13}, {71.5, 13}}, {{7.5, 10}, {71.5, 10}}, {{7.5, 7}, {71.5, 7}}},
		},
		{
			// z = 0 meets the tilted slab where |y|c ≤ 1: y within ±√2, x
			// -50.5..49.5; the centre plane on y = 0.
			name: "oblique plane on axial view", stack: oblique, plane: axialAt(0),
			slab:  []Point{{9.5, 60 - math.Sqrt2}, {109.5, 60 - math.Sqrt2}, {109.5, 60 + math.Sqrt2}, {9.5, 60 + math.Sqrt2}},
			area:  100 * 2 * math.Sqrt2,
			lines: [][2]Point{{{9.5, 60}, {109.5, 60}}},
		},
	} {
		t.Run(tc.name, func(t *testing.T) {
			const tol = 1e-9
			got := StackTrace(tc.stack, tc.plane)
			if tc.slab == nil {
				if got.Slab != nil || got.Lines != nil || got.FaceOn {
					t.Fatalf("got a trace %+v, want none", got)
				}
				return
			}
			if len(got.Slab) != len(tc.slab) {
				t.Fatalf("slab polygon %v, want corners %v", got.Slab, tc.slab)
			}
			for _, w := range tc.slab {
				found := false
				for _, g := range got.Slab {
					found = found || (math.Abs(g.X-w.X) < tol && math.Abs(g.Y-w.Y) < tol)
				}
				if !found {
					t.Errorf("slab polygon %v lacks corner %v", got.Slab, w)
				}
			}
			// The shoelace area equals the band's only when the corners are
			// in order around it.
			if a := math.Abs(shoelace(got.Slab)); math.Abs(a-tc.area) > 1e-6 {
				t.Errorf("slab polygon area %.6f, want %.6f (corners out of order?)", a, tc.area)
			}
			if got.FaceOn != tc.faceOn {
				t.Errorf("face-on %v, want %v", got.FaceOn, tc.faceOn)
			}
			if len(got.Lines) != len(tc.lines) {
				t.Fatalf("lines %v, want %v", got.Lines, tc.lines)
			}
			for n, w := range tc.lines {
				g := got.Lines[n]
				same := func(a, b Point) bool { return math.Abs(a.X-b.X) < tol && math.Abs(a.Y-b.Y) < tol }
				if !(same(g[0], w[0]) && same(g[1], w[1])) && !(same(g[0], w[1]) && same(g[1], w[0])) {
					t.Errorf("line %d: %v, want %v", n, g, w)
				}
			}
		})
	}
}

// shoelace returns the signed area of a polygon (Gauss's area formula).
func shoelace(p []Point) float64 {
	var a float64
	for n := range p {
		q, r := p[n], p[(n+1)%len(p)]
		a += q.X*r.Y - r.X*q.Y
	}
	return a / 2
}

// TestTracesDrawn: a scene with a measured plane differs from the same
// scene without it only near the plane's trace, and the emphasised trace
// is drawn in ColorPlane.
func TestTracesDrawn(t *testing.T) {
	p := Plane{Origin: dosemap.Vec3{-60, -60, 20}, U: dosemap.Vec3{1, 0, 0}, V: dosemap.Vec3{0, 1, 0}, PixelU: 1, PixelV: 1, Width: 120, Height: 120}
	coronal := stackFromDICOM([6]float64{1, 0, 0, 0, 0, -1}, [3]float64{-50, 10, 70}, 100, 100, [2]float64{1, 1}, 1, 3)
	v := FitView(p, 240, 240) // 2 display pixels per mm
	base, err := Render(&Scene{Plane: p}, v)
	if err != nil {
		t.Fatal(err)
	}
	with, err := Render(&Scene{Plane: p, Measured: []MeasuredStack{{Geometry: coronal, Emphasis: true}}}, v)
	if err != nil {
		t.Fatal(err)
	}
	// The centre line y = 10 mm is plane row 70, display row 140.5.
	_, cy := v.ToDisplay(p, Point{X: 60, Y: 70})
	hit := false
	for j := 0; j < v.Height; j++ {
		for i := 0; i < v.Width; i++ {
			o := base.PixOffset(i, j)
			if base.Pix[o] == with.Pix[o] && base.Pix[o+1] == with.Pix[o+1] && base.Pix[o+2] == with.Pix[o+2] {
				continue
			}
			// Changed pixels lie within the band (±1.5 mm = 3 display
			// pixels) plus the halo and line widths (about 3 pixels).
			if math.Abs(float64(j)+0.5-cy) > 7 {
				t.Fatalf("pixel (%d, %d) changed, %.1f display rows from the trace", i, j, float64(j)+0.5-cy)
			}
			if with.Pix[o] == ColorPlane.R && with.Pix[o+1] == ColorPlane.G && with.Pix[o+2] == ColorPlane.B {
				hit = true
			}
		}
	}
	if !hit {
		t.Error("no pixel of the emphasised trace in ColorPlane")
	}
}

// TestCaseStacks: the stacks of a case are listed only when the
// sonications were measured on planes of their own, each with its
// sonication's number, the selected one's emphasised.
func TestCaseStacks(t *testing.T) {
	axial := func(z float64) dosemap.Geometry {
		return dosemap.NewAxialGeometry(8, 8, 3, dosemap.Vec3{2, 2, 3}, dosemap.Vec3{-7, -7, z})
	}
	coronal := stackFromDICOM([6]float64{1, 0, 0, 0, 0, -1}, [3]float64{-7, 0, 7}, 8, 8, [2]float64{2, 2}, 1, 3)
	son := func(n int, g dosemap.Geometry, more ...dosemap.Geometry) *dosemap.Sonication {
		so := &dosemap.Sonication{Number: n, Geometry: g}
		for _, m := range more {
			so.Stacks = append(so.Stacks, &dosemap.Sonication{Number: n, Geometry: m})
		}
		return so
	}
	for _, tc := range []struct {
		name     string
		sons     []*dosemap.Sonication
		selected int
		want     []int // sonication number of each stack; nil: none listed
		emphasis []bool
	}{
		{"one shared slab", []*dosemap.Sonication{son(1, axial(0)), son(2, axial(0))}, 2, nil, nil},
		{"moving slab", []*dosemap.Sonication{son(1, axial(0)), son(2, axial(3))}, 2, []int{1, 2}, []bool{false, true}},
		{"two planes each", []*dosemap.Sonication{son(1, axial(0), coronal), son(2, axial(0), coronal)}, 1, []int{1, 1, 2, 2}, []bool{true, true, false, false}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			got := CaseStacks(&dosemap.Case{Sonications: tc.sons}, tc.selected)
			if len(got) != len(tc.want) {
				t.Fatalf("%d stacks listed, want %d", len(got), len(tc.want))
			}
			for n, st := range got {
				if st.Sonication != tc.want[n] || st.Emphasis != tc.emphasis[n] {
					t.Errorf("stack %d: sonication %d emphasis %v, want %d %v", n, st.Sonication, st.Emphasis, tc.want[n], tc.emphasis[n])
				}
			}
		})
	}
}

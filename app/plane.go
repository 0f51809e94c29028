//go:build cgo

package main

import (
	"math"
	"strings"

	"dosecover/dosemap"
	"dosecover/review"
)

// planeKind names the three planes the viewer can show, relative to the
// stack of the reference grid (the anatomy, or the dose grid without one).
type planeKind int

const (
	planeAcquisition planeKind = iota // the acquired slices (i, j at fixed k)
	planeReformatRow                  // rows × slices: i and k at fixed j
	planeReformatCol                  // columns × slices: j and k at fixed i
)

func (k planeKind) String() string {
	switch k {
	case planeReformatRow:
		return "Reformat across rows"
	case planeReformatCol:
		return "Reformat across columns"
	}
	return "Acquisition plane"
}

// label names the plane of kind on grid g by its orientation (axial,
// coronal, sagittal or oblique) and whether it is the acquired plane or a
// reformat; without a grid, by String.
func (k planeKind) label(g *dosemap.Geometry) string {
	if g == nil {
		return k.String()
	}
	_, _, n, _, _, _, _ := planeAxes(*g, k)
	name := review.PlaneOrientation(n)
	name = strings.ToUpper(name[:1]) + name[1:]
	if k == planeAcquisition {
		return name + " (acquired)"
	}
	return name + " (reformat)"
}

// planeAxes returns the in-plane unit directions (u to the right, v
// downwards on screen), the through-plane direction n, the number of
// slices along n and their spacing, and the plane's extent along u and v in
// mm, for kind on grid g. The acquisition plane keeps the grid's row and
// column directions; the reformats take (row or column, slice normal), made
// orthogonal, with the signs of the usual presentation (displayDown), as
// the shared renderer and the report do.
func planeAxes(g dosemap.Geometry, kind planeKind) (u, v, n dosemap.Vec3, slices int, step, width, height float64) {
	switch kind {
	case planeReformatRow, planeReformatCol:
		u, n, slices, step, width = g.Row, g.Col, g.Rows, g.Spacing[1], float64(g.Cols)*g.Spacing[0]
		if kind == planeReformatCol {
			u, n, slices, step, width = g.Col, g.Row, g.Cols, g.Spacing[0], float64(g.Rows)*g.Spacing[1]
		}
		v = g.Normal.Sub(u.Scale(g.Normal.Dot(u))).Unit()
		u, v = displayDown(u), displayDown(v)
		// n is the grid axis that is not in the plane; the slice step is
		// measured along it, so positions follow the grid's voxel centres.
		return u, v, n, slices, step, width, float64(g.Slices) * g.Spacing[2] * math.Abs(g.Normal.Dot(v))
	}
	return g.Row, g.Col, g.Normal, g.Slices, g.Spacing[2], float64(g.Cols) * g.Spacing[0], float64(g.Rows) * g.Spacing[1]
}

// displayDown flips d so that it points towards patient left (+x),
// posterior (+y) or inferior (-z), whichever axis dominates: the downward
// (and rightward) directions of the usual axial, coronal and sagittal
// presentations (common practice).
func displayDown(d dosemap.Vec3) dosemap.Vec3 {
	a := 0
	for k := 1; k < 3; k++ {
		if math.Abs(d[k]) > math.Abs(d[a]) {
			a = k
		}
	}
	if (a == 2 && d[2] > 0) || (a != 2 && d[a] < 0) {
		return d.Scale(-1)
	}
	return d
}

// gridCentre returns the patient position of the centre of g.
func gridCentre(g dosemap.Geometry) dosemap.Vec3 {
	return g.Point(float64(g.Cols-1)/2, float64(g.Rows-1)/2, float64(g.Slices-1)/2)
}

// viewTransform maps screen pixels of a view to patient positions:
//
//	P(x, y) = Centre + (x - W/2)·s·U + (y - H/2)·s·V
//
// with s the millimetres per pixel; Centre lies on the displayed slice.
type viewTransform struct {
	Centre     dosemap.Vec3
	U, V       dosemap.Vec3
	MMPerPixel float64
	W, H       int
	// Slice is the whole displayed slice, independent of zoom and pan;
	// zero when unknown.
	Slice sliceFrame
}

// sliceFrame is the extent of one slice of the reference grid: its centre,
// its size along U and V (mm) and the finest in-plane voxel spacing (mm)
// of the grid. A renderer samples the slice once on a plane of its own
// and reuses that plane while the view zooms and pans.
type sliceFrame struct {
	Centre        dosemap.Vec3
	Width, Height float64
	Spacing       float64
	Normal        dosemap.Vec3 // unit step direction between slices
	Step          float64      // mm between slices
	Index, Count  int          // this slice and the number of slices
}

// neighbour returns the frame of the slice d slices away and whether it
// exists.
func (f sliceFrame) neighbour(d int) (sliceFrame, bool) {
	k := f.Index + d
	if k < 0 || k >= f.Count || !(f.Step > 0) {
		return f, false
	}
	f.Centre = f.Centre.Add(f.Normal.Scale(float64(d) * f.Step))
	f.Index = k
	return f, true
}

// slicePlanePixel is the pixel size (mm) of the plane on which a slice is
// sampled: the grid's voxel spacing, made finer when needed to put at least
// 256 pixels across the slice (so outlines stay smooth on a coarse grid),
// and never so fine that a side exceeds 2048 pixels.
func (f sliceFrame) slicePlanePixel() float64 {
	ext := math.Max(f.Width, f.Height)
	px := math.Min(f.Spacing, ext/256)
	return math.Max(px, ext/2048)
}

// At returns the patient position of the centre of pixel (x, y).
func (t viewTransform) At(x, y float64) dosemap.Vec3 {
	dx := (x - float64(t.W)/2) * t.MMPerPixel
	dy := (y - float64(t.H)/2) * t.MMPerPixel
	return t.Centre.Add(t.U.Scale(dx)).Add(t.V.Scale(dy))
}

// Pixel returns the screen position of patient position p (projected onto
// the plane).
func (t viewTransform) Pixel(p dosemap.Vec3) (x, y float64) {
	d := p.Sub(t.Centre)
	return float64(t.W)/2 + d.Dot(t.U)/t.MMPerPixel, float64(t.H)/2 + d.Dot(t.V)/t.MMPerPixel
}

// orientationLetter returns the LPS letter of the patient direction d
// (the dominant axis): L/R for x, P/A for y, S/I for z.
func orientationLetter(d dosemap.Vec3) string {
	ax, ay, az := math.Abs(d[0]), math.Abs(d[1]), math.Abs(d[2])
	switch {
	case ax >= ay && ax >= az:
		if d[0] > 0 {
			return "L"
		}
		return "R"
	case ay >= az:
		if d[1] > 0 {
			return "P"
		}
		return "A"
	}
	if d[2] > 0 {
		return "S"
	}
	return "I"
}

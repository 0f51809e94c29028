package view

import (
	"image"
	"math"
	"sort"
	"strconv"

	"dosecover/dosemap"
)

// MeasuredStack is one stack of thermometry slices of a sonication (a
// plane, a few slices or a slab), drawn on a view as its trace: where the
// view's plane meets the stack.
type MeasuredStack struct {
	// Geometry is the stack's grid. Slice k spans half a slice step
	// (Spacing[2]) either side of its centre plane, and its field of view
	// half a pixel beyond the outermost pixel centres: the region where a
	// sonication's dose is taken as measured (dosemap.Resample).
	Geometry   dosemap.Geometry
	Sonication int // the sonication's number, written beside an emphasised trace; 0: none
	// Emphasis draws the trace thicker with its slab outlined: the
	// sonication selected for review.
	Emphasis bool
}

// Trace is where a plane meets a stack of slices, in the plane's pixel
// coordinates (Plane.Pixel).
type Trace struct {
	// Slab is the convex polygon where the plane meets the stack's slab
	// (the box of its voxels); nil when the plane misses it. For a plane
	// crossing thin slices edge-on it is a band as wide as the slab; for
	// a plane inside the slab and parallel to the slices it is the field
	// of view.
	Slab []Point
	// Lines are the segments where the plane meets the centre plane of
	// each slice, clipped to the slice's field of view; none when the
	// plane is parallel to the slices (FaceOn) or misses them.
	Lines [][2]Point
	// FaceOn is true when the plane is parallel to the slices (normals
	// within about 0.08°) and lies inside the slab: the plane shows
	// measured slices face-on.
	FaceOn bool
}

// parallelCos is the |cos| between normals above which a plane and a
// stack count as parallel (about 0.08°).
const parallelCos = 1 - 1e-6

// StackTrace returns the trace of stack g on plane p.
//
// The plane of p is the set of points x with n·(x − O) = 0, n = U×V and O
// its origin; each slice of g is a plane of the same form with normal
// Row×Col and a point on it at the centre of its first pixel, as DICOM
// PS3.3 C.7.6.2.1.1 defines a slice from Image Orientation (Patient)
// (row and column direction cosines) and Image Position (Patient) (centre
// of the first pixel). The slab is the parallelepiped of g's voxel boxes;
// its intersection with the plane is found from the signed distances of
// its eight corners to the plane, edge by edge, and each slice's field of
// view (a rectangle on its centre plane) is clipped the same way.
func StackTrace(g dosemap.Geometry, p Plane) Trace {
	var t Trace
	if g.Cols <= 0 || g.Rows <= 0 || g.Slices <= 0 {
		return t
	}
	n := p.Normal()
	dist := func(q dosemap.Vec3) float64 { return q.Sub(p.Origin).Dot(n) }
	// Slab: corners at voxel coordinates -0.5 and N-0.5 along each axis.
	lo := [3]float64{-0.5, -0.5, -0.5}
	hi := [3]float64{float64(g.Cols) - 0.5, float64(g.Rows) - 0.5, float64(g.Slices) - 0.5}
	var corner [8]dosemap.Vec3
	for c := range corner {
		var ijk [3]float64
		for a := 0; a < 3; a++ {
			ijk[a] = lo[a]
			if c>>a&1 == 1 {
				ijk[a] = hi[a]
			}
		}
		corner[c] = g.Point(ijk[0], ijk[1], ijk[2])
	}
	var edges [][2]dosemap.Vec3
	for c := range corner {
		for a := 0; a < 3; a++ {
			if c>>a&1 == 0 {
				edges = append(edges, [2]dosemap.Vec3{corner[c], corner[c|1<<a]})
			}
		}
	}
	t.Slab = convexPolygon(p, cut(edges, dist))
	if t.Slab == nil {
		return t
	}
	if math.Abs(n.Dot(g.Row.Cross(g.Col).Unit())) >= parallelCos {
		t.FaceOn = true
		return t
	}
	for k := 0; k < g.Slices; k++ {
		kk := float64(k)
		r := [4]dosemap.Vec3{g.Point(lo[0], lo[1], kk), g.Point(hi[0], lo[1], kk), g.Point(hi[0], hi[1], kk), g.Point(lo[0], hi[1], kk)}
		pts := cut([][2]dosemap.Vec3{{r[0], r[1]}, {r[1], r[2]}, {r[2], r[3]}, {r[3], r[0]}}, dist)
		seg := convexPolygon(p, pts)
		if len(seg) < 2 {
			continue
		}
		// The segment is the pair of points farthest apart (a line's
		// points, so the first and last after sorting by angle are not
		// necessarily its ends).
		a, b := farthestPair(seg)
		t.Lines = append(t.Lines, [2]Point{a, b})
	}
	return t
}

// cut returns the points where the edges cross the plane of signed
// distance dist (an edge lying in the plane gives both its ends).
func cut(edges [][2]dosemap.Vec3, dist func(dosemap.Vec3) float64) []dosemap.Vec3 {
	const eps = 1e-9
	var pts []dosemap.Vec3
	for _, e := range edges {
		d0, d1 := dist(e[0]), dist(e[1])
		switch {
		case math.Abs(d0) <= eps && math.Abs(d1) <= eps:
			pts = append(pts, e[0], e[1])
		case math.Abs(d0) <= eps:
			pts = append(pts, e[0])
		case math.Abs(d1) <= eps:
			pts = append(pts, e[1])
		case (d0 < 0) != (d1 < 0):
			f := d0 / (d0 - d1)
			pts = append(pts, e[0].Add(e[1].Sub(e[0]).Scale(f)))
		}
	}
	return pts
}

// convexPolygon projects the points onto p's pixel coordinates, drops
// duplicates (within 1e-6 pixel) and orders them by angle around their
// mean: the outline of their convex hull when they are its corners, as
// the plane sections of a convex box are. Nil without points.
func convexPolygon(p Plane, pts []dosemap.Vec3) []Point {
	var out []Point
	for _, q := range pts {
		x, y := p.Pixel(q)
		dup := false
		for _, o := range out {
			if math.Abs(o.X-x) < 1e-6 && math.Abs(o.Y-y) < 1e-6 {
				dup = true
				break
			}
		}
		if !dup {
			out = append(out, Point{x, y})
		}
	}
	if len(out) < 3 {
		return out
	}
	var cx, cy float64
	for _, o := range out {
		cx += o.X
		cy += o.Y
	}
	cx /= float64(len(out))
	cy /= float64(len(out))
	sort.Slice(out, func(a, b int) bool {
		return math.Atan2(out[a].Y-cy, out[a].X-cx) < math.Atan2(out[b].Y-cy, out[b].X-cx)
	})
	return out
}

// farthestPair returns the two points of pts farthest apart.
func farthestPair(pts []Point) (Point, Point) {
	a, b, best := pts[0], pts[0], -1.0
	for i := range pts {
		for j := i + 1; j < len(pts); j++ {
			if d := math.Hypot(pts[i].X-pts[j].X, pts[i].Y-pts[j].Y); d > best {
				a, b, best = pts[i], pts[j], d
			}
		}
	}
	return a, b
}

// drawTraces draws the traces of the measured stacks on the view: thin
// lines for the slices of every stack (the field of view when a stack is
// seen face-on), and for an emphasised stack thicker lines, its slab
// outlined (dashed) and its sonication's number.
func (r *Renderer) drawTraces(dst *image.RGBA, cv *canvas, p Plane, v View, stacks []MeasuredStack) {
	type line struct {
		pts    []Point
		closed bool
	}
	var plain []line
	type emph struct {
		slab   []Point
		lines  [][]Point
		num    int
		faceOn bool
	}
	var strong []emph
	for _, st := range stacks {
		t := StackTrace(st.Geometry, p)
		if len(t.Slab) == 0 {
			continue
		}
		slab := append([]Point(nil), r.display(p, v, t.Slab)...)
		var lines [][]Point
		for _, l := range t.Lines {
			lines = append(lines, append([]Point(nil), r.display(p, v, l[:])...))
		}
		if st.Emphasis {
			strong = append(strong, emph{slab, lines, st.Sonication, t.FaceOn})
			continue
		}
		if t.FaceOn {
			plain = append(plain, line{slab, true})
		}
		for _, l := range lines {
			plain = append(plain, line{l, false})
		}
	}
	// All plain traces in one layer: a faint halo, then the lines at
	// partial opacity, so that many planes do not hide the picture.
	for _, l := range plain {
		cv.polyline(l.pts, l.closed, 3.25, Solid)
	}
	cv.flush(haloColor, 0.5)
	for _, l := range plain {
		cv.polyline(l.pts, l.closed, 1.25, Solid)
	}
	cv.flush(ColorPlane, 0.9)
	for _, e := range strong {
		cv.stroke(e.slab, true, 1.5, Dashed, ColorPlane)
		for _, l := range e.lines {
			cv.stroke(l, false, 2.5, Solid, ColorPlane)
		}
	}
	size := math.Max(11, labelSize(v)-3)
	faceOn := false
	for _, e := range strong {
		switch {
		case e.faceOn && !faceOn:
			// This view shows the sonication's measured plane: say so
			// once, at the bottom left above the orientation letter's
			// line.
			faceOn = true
			text := "measured plane"
			if e.num > 0 {
				text = "measured plane of sonication " + strconv.Itoa(e.num)
			}
			drawText(dst, text, size, 8, v.Height-8-int(2.2*size), anchorBottomLeft, ColorPlane)
		case !e.faceOn && e.num > 0:
			x, y := traceLabelAt(e.slab, v)
			drawText(dst, strconv.Itoa(e.num), size, x, y, anchorCentre, ColorPlane)
		}
	}
}

// traceLabelAt returns where to write an emphasised trace's number: at
// the corner of its slab nearest the view's top left, kept inside the
// view.
func traceLabelAt(slab []Point, v View) (int, int) {
	best, bx, by := math.Inf(1), 14.0, 14.0
	for _, q := range slab {
		x := math.Max(14, math.Min(float64(v.Width)-14, q.X-10))
		y := math.Max(14, math.Min(float64(v.Height)-14, q.Y-10))
		if d := x + y; d < best {
			best, bx, by = d, x, y
		}
	}
	return int(bx), int(by)
}

// SlicePlane returns the plane of slice k of stack g, with g's row and
// column directions as its axes (signed for the usual presentation as
// PlaneThrough signs its reformats: rightwards and downwards towards
// patient left, posterior or inferior), covering the extent of grid cover
// with square pixels of pixelMM (0: the finest spacing of cover). It shows
// a measured slice as it was acquired, whatever the orientation of the
// grid it is drawn over.
func SlicePlane(g dosemap.Geometry, k int, cover dosemap.Geometry, pixelMM float64) (Plane, error) {
	return ObliquePlane(cover, g.Point(0, 0, float64(k)), displayRight(g.Row), displayDown(g.Col), pixelMM)
}

// CaseStacks returns the measured stacks of every sonication of c (its
// first stack and its further ones, Sonication set to its number), the
// stacks of sonication number selected emphasised, when the sonications
// were measured on planes of their own: some sonication has several
// stacks, or two sonications' grids differ. When every sonication was
// measured on one shared slab it returns nil: the slab is the thermometry
// grid the views already show, and its trace would only repeat it.
func CaseStacks(c *dosemap.Case, selected int) []MeasuredStack {
	if c == nil {
		return nil
	}
	var out []MeasuredStack
	differ := false
	for _, so := range c.Sonications {
		for n, st := range append([]*dosemap.Sonication{so}, so.Stacks...) {
			if n > 0 || (len(out) > 0 && !st.Geometry.SameGrid(out[0].Geometry, 0.01)) {
				differ = true
			}
			out = append(out, MeasuredStack{Geometry: st.Geometry, Sonication: so.Number, Emphasis: so.Number == selected})
		}
	}
	if !differ {
		return nil
	}
	return out
}

package view

import (
	"math"

	"dosecover/dosemap"
)

// Point is a continuous pixel coordinate of a plane (x to the right, y
// downwards; integers are pixel centres).
type Point struct{ X, Y float64 }

// Polyline is one isoline or outline: a chain of points in plane pixel
// coordinates and, when traced on a Plane, the same points in patient mm.
//
// A closed polyline does not repeat its first point; the closing segment is
// implied. An open polyline ends where the contour leaves the sampled grid
// or meets a NaN sample.
type Polyline struct {
	Pixels  []Point
	Patient []dosemap.Vec3 // nil when traced without a plane
	Closed  bool
}

// Isolines traces the isolines of values (a Plane's samples) at level and
// fills in both pixel and patient coordinates. See MarchingSquares.
func (p Plane) Isolines(values []float32, level float64) []Polyline {
	lines := MarchingSquares(values, p.Width, p.Height, level)
	for n := range lines {
		pts := make([]dosemap.Vec3, len(lines[n].Pixels))
		for m, q := range lines[n].Pixels {
			pts[m] = p.Point(q.X, q.Y)
		}
		lines[n].Patient = pts
	}
	return lines
}

// MarchingSquares traces the isolines at level of a w×h grid of samples
// (index y*w + x) and returns them as polylines in pixel coordinates.
//
// A sample is inside when its value is >= level. Each cell of four samples
// with inside and outside corners contributes segments whose ends lie on
// the cell edges at the linearly interpolated crossing
//
//	t = (level - a) / (b - a)
//
// (Lorensen & Cline 1987, in two dimensions). The two ambiguous
// (saddle) configurations are resolved with the asymptotic decider
// (Nielson & Hamann, IEEE Visualization 1991): the bilinear interpolant's
// value at its saddle point,
//
//	s = (v00*v11 - v10*v01) / (v00 + v11 - v10 - v01),
//
// decides whether the two inside corners are joined (s >= level) or
// separated. The decision depends only on the cell's own four values, so
// neighbouring cells always agree, the isolines never cross, and the result
// matches the topology of the bilinear interpolant.
//
// Cells with a NaN corner are skipped: an isoline ends (open) where it
// meets missing data or the grid border. Segments are oriented with the
// inside (higher values) on the left as seen on screen (y downwards), so a
// closed isoline around a maximum runs anticlockwise on screen.
func MarchingSquares(values []float32, w, h int, level float64) []Polyline {
	if w < 2 || h < 2 || len(values) < w*h || math.IsNaN(level) {
		return nil
	}
	lev := float32(level)
	// Edge identifiers: horizontal edge from (x, y) to (x+1, y) is
	// 2*(y*w+x); vertical edge from (x, y) to (x, y+1) is 2*(y*w+x)+1.
	type seg struct{ a, b int32 }
	var segs []seg
	for y := 0; y < h-1; y++ {
		r0 := values[y*w : y*w+w]
		r1 := values[(y+1)*w : (y+1)*w+w]
		for x := 0; x < w-1; x++ {
			// Corners in cyclic order: c0 (x,y), c1 (x+1,y), c2 (x+1,y+1), c3 (x,y+1).
			v0, v1, v2, v3 := r0[x], r0[x+1], r1[x+1], r1[x]
			var code int
			if v0 >= lev {
				code |= 1
			}
			if v1 >= lev {
				code |= 2
			}
			if v2 >= lev {
				code |= 4
			}
			if v3 >= lev {
				code |= 8
			}
			if code == 0 || code == 15 {
				continue
			}
			if v0 != v0 || v1 != v1 || v2 != v2 || v3 != v3 {
				continue
			}
			base := int32(2 * (y*w + x))
			// Edge k joins corner k to corner k+1 (mod 4).
			edge := [4]int32{base, base + 2 + 1, base + int32(2*w), base + 1}
			var ent, lea [2]int
			ne, nl := 0, 0
			for k := 0; k < 4; k++ {
				a := code>>k&1 == 1
				b := code>>((k+1)&3)&1 == 1
				if a && !b {
					lea[nl] = k
					nl++
				} else if !a && b {
					ent[ne] = k
					ne++
				}
			}
			if ne == 1 {
				segs = append(segs, seg{edge[ent[0]], edge[lea[0]]})
				continue
			}
			// Saddle: inside corners are c0, c2 or c1, c3.
			den := float64(v0) + float64(v2) - float64(v1) - float64(v3)
			joined := true // the centre belongs to the inside
			if den != 0 {
				s := (float64(v0)*float64(v2) - float64(v1)*float64(v3)) / den
				joined = s >= level
			} else {
				joined = (float64(v0)+float64(v1)+float64(v2)+float64(v3))/4 >= level
			}
			for _, e := range ent {
				l := (e + 1) & 3 // separated: cut off the inside corner after e
				if joined {
					l = (e + 3) & 3 // joined: cut off the outside corner before e
				}
				segs = append(segs, seg{edge[e], edge[l]})
			}
		}
	}
	if len(segs) == 0 {
		return nil
	}
	// Link head to tail: every crossing starts at most one segment and ends
	// at most one.
	next := make(map[int32]int32, len(segs))
	ends := make(map[int32]bool, len(segs))
	for n, s := range segs {
		next[s.a] = int32(n)
		ends[s.b] = true
	}
	point := func(e int32) Point {
		cell := int(e >> 1)
		x, y := cell%w, cell/w
		a := float64(values[cell])
		var b float64
		if e&1 == 0 {
			b = float64(values[cell+1])
		} else {
			b = float64(values[cell+w])
		}
		t := 0.5
		if b != a {
			t = (level - a) / (b - a)
		}
		if e&1 == 0 {
			return Point{float64(x) + t, float64(y)}
		}
		return Point{float64(x), float64(y) + t}
	}
	used := make([]bool, len(segs))
	var lines []Polyline
	trace := func(start int) Polyline {
		var pts []Point
		n := start
		pts = append(pts, point(segs[n].a))
		closed := false
		for {
			used[n] = true
			e := segs[n].b
			m, ok := next[e]
			if ok && int(m) == start {
				closed = true
				break
			}
			pts = appendPoint(pts, point(e))
			if !ok || used[m] {
				break
			}
			n = int(m)
		}
		return Polyline{Pixels: pts, Closed: closed}
	}
	// Open chains first: they start at a crossing that ends no segment.
	for n, s := range segs {
		if !used[n] && !ends[s.a] {
			lines = append(lines, trace(n))
		}
	}
	for n := range segs {
		if !used[n] {
			lines = append(lines, trace(n))
		}
	}
	return lines
}

// appendPoint appends q unless it repeats the last point (a crossing on a
// sample that equals the level).
func appendPoint(pts []Point, q Point) []Point {
	if l := len(pts); l > 0 && pts[l-1] == q {
		return pts
	}
	return append(pts, q)
}

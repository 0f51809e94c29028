package view

import (
	"fmt"
	"image"
	"math"
	"slices"

	"dosecover/dosemap"
)

// Region is a region of patient space to outline or fill: either a mask on
// a grid or a structure of closed planar contours. When both are set the
// mask is used.
//
// A mask may hold 0/1 values (as made by MaskRegion) or the fraction of
// each voxel inside the region (0..1, partial volume): it is interpolated
// trilinearly and the region is where the result is >= 0.5, so fractions
// place the outline between voxel centres where the surface crosses. A
// mask with values above 1 (a label volume, n > 0 in the voxels of region
// n) or with NaN is first reduced to 1 where the value is >= 0.5 and 0
// elsewhere (NaN included), so labels and unmeasured voxels cannot shift
// the outline.
type Region struct {
	Mask      *dosemap.Volume
	Structure *dosemap.Structure
}

// IsZero reports whether r names no region.
func (r Region) IsZero() bool { return r.Mask == nil && r.Structure == nil }

// maskVolume returns mask m on grid g as a 0/1 volume for a Region. The
// mask must have one value per voxel of g.
func maskVolume(g dosemap.Geometry, m []bool) (*dosemap.Volume, error) {
	if len(m) != g.Len() {
		return nil, fmt.Errorf("mask holds %d values for a %d×%d×%d grid", len(m), g.Cols, g.Rows, g.Slices)
	}
	v := dosemap.NewVolume(g)
	for n, in := range m {
		if in {
			v.Data[n] = 1
		}
	}
	return v, nil
}

// MaskRegion returns mask m on grid g as a 0/1 volume wrapped in a
// Region; m must have one value per voxel of g.
func MaskRegion(g dosemap.Geometry, m []bool) (Region, error) {
	v, err := maskVolume(g, m)
	if err != nil {
		return Region{}, err
	}
	return Region{Mask: v}, nil
}

// binaryMask returns m when its values are all within 0..1, and otherwise
// a 0/1 copy: 1 where m >= 0.5, 0 elsewhere and at NaN.
func binaryMask(m *dosemap.Volume) *dosemap.Volume {
	clean := true
	for _, v := range m.Data {
		if !(v >= 0 && v <= 1) {
			clean = false
			break
		}
	}
	if clean {
		return m
	}
	b := dosemap.NewVolume(m.Geometry)
	for n, v := range m.Data {
		if v >= 0.5 {
			b.Data[n] = 1
		}
	}
	return b
}

// maskBox returns the voxel index box [lo, hi] of the voxels of v that are
// >= 0.5, or ok false when there are none.
func maskBox(v *dosemap.Volume) (lo, hi [3]int, ok bool) {
	lo = [3]int{math.MaxInt, math.MaxInt, math.MaxInt}
	hi = [3]int{-1, -1, -1}
	n := 0
	for k := 0; k < v.Slices; k++ {
		for j := 0; j < v.Rows; j++ {
			for i := 0; i < v.Cols; i++ {
				if v.Data[n] >= 0.5 {
					lo = [3]int{min(lo[0], i), min(lo[1], j), min(lo[2], k)}
					hi = [3]int{max(hi[0], i), max(hi[1], j), max(hi[2], k)}
				}
				n++
			}
		}
	}
	return lo, hi, hi[0] >= 0
}

// projectBox returns the plane pixel rectangle covering the projection of
// the box of patient points corners (with margin pixels to spare), clipped
// to the plane.
func projectBox(p Plane, corners []dosemap.Vec3, margin int) image.Rectangle {
	x0, y0 := math.Inf(1), math.Inf(1)
	x1, y1 := math.Inf(-1), math.Inf(-1)
	for _, c := range corners {
		x, y := p.Pixel(c)
		x0, x1 = math.Min(x0, x), math.Max(x1, x)
		y0, y1 = math.Min(y0, y), math.Max(y1, y)
	}
	r := image.Rect(int(math.Floor(x0))-margin, int(math.Floor(y0))-margin,
		int(math.Ceil(x1))+1+margin, int(math.Ceil(y1))+1+margin)
	return r.Intersect(image.Rect(0, 0, p.Width, p.Height))
}

// slab is the set of a structure's contours on one plane: polygons in the
// 2-D basis (e1, e2) of that plane.
type slab struct {
	offset float64 // position along the structure normal, mm
	polys  [][][2]float64
}

// planarStructure is a structure prepared for intersection with planes.
type planarStructure struct {
	normal, e1, e2 dosemap.Vec3
	slabs          []slab  // by increasing offset
	half           float64 // half the distance between contour planes, mm
	lo, hi         dosemap.Vec3
	ok             bool
}

// prepareStructure groups the contours of s by plane. All contours are
// taken to share one normal (that of the first contour with an area), as
// RTSTRUCT planar contours do.
func prepareStructure(s *dosemap.Structure) *planarStructure {
	ps := &planarStructure{}
	for _, c := range s.Contours {
		if n := newellNormal(c.Points); n.Norm() > 0 {
			ps.normal = n.Unit()
			break
		}
	}
	if ps.normal.Norm() == 0 {
		return ps
	}
	// An in-plane basis.
	ref := dosemap.Vec3{1, 0, 0}
	if math.Abs(ps.normal[0]) > 0.9 {
		ref = dosemap.Vec3{0, 1, 0}
	}
	ps.e1 = ref.Sub(ps.normal.Scale(ref.Dot(ps.normal))).Unit()
	ps.e2 = ps.normal.Cross(ps.e1)
	ps.lo = dosemap.Vec3{math.Inf(1), math.Inf(1), math.Inf(1)}
	ps.hi = dosemap.Vec3{math.Inf(-1), math.Inf(-1), math.Inf(-1)}
	for _, c := range s.Contours {
		if len(c.Points) < 3 {
			continue
		}
		var off float64
		poly := make([][2]float64, len(c.Points))
		for m, q := range c.Points {
			off += q.Dot(ps.normal)
			poly[m] = [2]float64{q.Dot(ps.e1), q.Dot(ps.e2)}
			for a := 0; a < 3; a++ {
				ps.lo[a] = math.Min(ps.lo[a], q[a])
				ps.hi[a] = math.Max(ps.hi[a], q[a])
			}
		}
		off /= float64(len(c.Points))
		// Contours within 0.01 mm share a plane.
		found := false
		for n := range ps.slabs {
			if math.Abs(ps.slabs[n].offset-off) < 0.01 {
				ps.slabs[n].polys = append(ps.slabs[n].polys, poly)
				found = true
				break
			}
		}
		if !found {
			ps.slabs = append(ps.slabs, slab{offset: off, polys: [][][2]float64{poly}})
		}
	}
	if len(ps.slabs) == 0 {
		return ps
	}
	slices.SortFunc(ps.slabs, func(a, b slab) int {
		switch {
		case a.offset < b.offset:
			return -1
		case a.offset > b.offset:
			return 1
		}
		return 0
	})
	// Each contour stands for the slab half-way to its neighbours: half the
	// median spacing of the contour planes (0.5 mm for a single plane).
	ps.half = 0.5
	if len(ps.slabs) > 1 {
		d := make([]float64, len(ps.slabs)-1)
		for n := range d {
			d[n] = ps.slabs[n+1].offset - ps.slabs[n].offset
		}
		slices.Sort(d)
		ps.half = d[len(d)/2] / 2
	}
	pad := ps.normal.Scale(ps.half)
	for a := 0; a < 3; a++ {
		ps.lo[a] -= math.Abs(pad[a])
		ps.hi[a] += math.Abs(pad[a])
	}
	ps.ok = true
	return ps
}

// newellNormal returns the (unnormalised) polygon normal by Newell's method.
func newellNormal(pts []dosemap.Vec3) dosemap.Vec3 {
	var n dosemap.Vec3
	for m := range pts {
		a, b := pts[m], pts[(m+1)%len(pts)]
		n[0] += (a[1] - b[1]) * (a[2] + b[2])
		n[1] += (a[2] - b[2]) * (a[0] + b[0])
		n[2] += (a[0] - b[0]) * (a[1] + b[1])
	}
	return n
}

// slabAt returns the slab whose thickness contains offset off, or nil.
func (ps *planarStructure) slabAt(off float64) *slab {
	n, _ := slices.BinarySearchFunc(ps.slabs, off, func(s slab, t float64) int {
		switch {
		case s.offset < t:
			return -1
		case s.offset > t:
			return 1
		}
		return 0
	})
	best, bd := -1, math.Inf(1)
	for _, m := range []int{n - 1, n} {
		if m >= 0 && m < len(ps.slabs) {
			if d := math.Abs(ps.slabs[m].offset - off); d < bd {
				best, bd = m, d
			}
		}
	}
	if best < 0 || bd > ps.half+1e-6 {
		return nil
	}
	return &ps.slabs[best]
}

// inside reports the even-odd rule for point (u, w) against polys.
func insidePolys(polys [][][2]float64, u, w float64) bool {
	in := false
	for _, poly := range polys {
		n := len(poly)
		for a, b := 0, n-1; a < n; b, a = a, a+1 {
			pa, pb := poly[a], poly[b]
			if (pa[1] > w) != (pb[1] > w) {
				x := pa[0] + (w-pa[1])*(pb[0]-pa[0])/(pb[1]-pa[1])
				if u < x {
					in = !in
				}
			}
		}
	}
	return in
}

// coplanarSlab returns the slab the plane p lies in when p is parallel to
// the structure's contours (within 0.5°) and within its thickness.
func (ps *planarStructure) coplanarSlab(p Plane) *slab {
	if !ps.ok || math.Abs(p.Normal().Dot(ps.normal)) < math.Cos(0.5*math.Pi/180) {
		return nil
	}
	return ps.slabAt(p.Origin.Dot(ps.normal))
}

// rasterise writes the fraction of each pixel of p within r inside the
// structure into the r-local field. A point is inside when the contours of
// the slab containing it enclose it by the even-odd rule.
func (ps *planarStructure) rasterise(p Plane, r image.Rectangle, field []float32) {
	if !ps.ok {
		return
	}
	// Four samples per pixel (a 2×2 grid at ±1/4 pixel) give the fraction
	// of the pixel inside, so the 0.5 outline runs smoothly between pixel
	// centres instead of in pixel steps.
	offs := [4][2]float64{{-0.25, -0.25}, {0.25, -0.25}, {-0.25, 0.25}, {0.25, 0.25}}
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			var v float32
			for _, o := range offs {
				q := p.Point(float64(x)+o[0], float64(y)+o[1])
				s := ps.slabAt(q.Dot(ps.normal))
				if s != nil && insidePolys(s.polys, q.Dot(ps.e1), q.Dot(ps.e2)) {
					v += 0.25
				}
			}
			field[(y-r.Min.Y)*r.Dx()+x-r.Min.X] = v
		}
	}
}

// slabOutlines returns the contours of slab s projected into plane p's
// pixel coordinates (closed polylines).
func (ps *planarStructure) slabOutlines(p Plane, s *slab) []Polyline {
	var out []Polyline
	for _, poly := range s.polys {
		pl := Polyline{Closed: true, Pixels: make([]Point, 0, len(poly)), Patient: make([]dosemap.Vec3, 0, len(poly))}
		for _, q2 := range poly {
			q := ps.e1.Scale(q2[0]).Add(ps.e2.Scale(q2[1])).Add(ps.normal.Scale(s.offset))
			x, y := p.Pixel(q)
			pl.Pixels = appendPoint(pl.Pixels, Point{x, y})
			pl.Patient = append(pl.Patient, q)
		}
		if n := len(pl.Pixels); n > 1 && pl.Pixels[0] == pl.Pixels[n-1] {
			pl.Pixels = pl.Pixels[:n-1]
			pl.Patient = pl.Patient[:len(pl.Patient)-1]
		}
		out = append(out, pl)
	}
	return out
}

// boxCorners returns the eight corners of the axis-aligned box [lo, hi].
func boxCorners(lo, hi dosemap.Vec3) []dosemap.Vec3 {
	c := make([]dosemap.Vec3, 8)
	for n := range c {
		for a := 0; a < 3; a++ {
			if n>>a&1 == 0 {
				c[n][a] = lo[a]
			} else {
				c[n][a] = hi[a]
			}
		}
	}
	return c
}

// RegionOutlines returns the outline of region r on plane p as polylines
// (pixel and patient coordinates). A mask is sampled trilinearly on p and
// traced at 0.5; a structure is drawn from its own contour when p lies in
// one of its contour planes and otherwise rasterised on p (nearest contour
// plane, even-odd rule) and traced at 0.5.
func RegionOutlines(p Plane, r Region) []Polyline {
	return newRegionField(p, r).outlines
}

// regionField is a region evaluated on a plane: a 0..1 field (inside
// >= 0.5) at the plane pixels of its bounding rectangle box, row by row
// (index (y-box.Min.Y)*box.Dx() + x-box.Min.X), and its outlines.
type regionField struct {
	field    []float32
	box      image.Rectangle
	outlines []Polyline
}

// newRegionField evaluates r on p.
func newRegionField(p Plane, r Region) *regionField {
	rf := &regionField{}
	switch {
	case r.Mask != nil:
		m := r.Mask
		if m.Check() != nil {
			return rf
		}
		m = binaryMask(m)
		lo, hi, ok := maskBox(m)
		if !ok {
			return rf
		}
		var corners []dosemap.Vec3
		for c := 0; c < 8; c++ {
			i := float64(lo[0]) - 1 + float64(c&1)*float64(hi[0]-lo[0]+2)
			j := float64(lo[1]) - 1 + float64(c>>1&1)*float64(hi[1]-lo[1]+2)
			k := float64(lo[2]) - 1 + float64(c>>2&1)*float64(hi[2]-lo[2]+2)
			corners = append(corners, m.Point(i, j, k))
		}
		rf.box = projectBox(p, corners, 1)
		rf.field = make([]float32, rf.box.Dx()*rf.box.Dy())
		sampleRect(rf.field, rf.box.Dx(), rf.box.Min, m, p, rf.box, 0)
		for n, v := range rf.field {
			if v != v {
				rf.field[n] = 0
			}
		}
		rf.outlines = traceBox(p, rf.field, rf.box)
	case r.Structure != nil:
		ps := prepareStructure(r.Structure)
		if !ps.ok {
			return rf
		}
		rf.box = projectBox(p, boxCorners(ps.lo, ps.hi), 1)
		rf.field = make([]float32, rf.box.Dx()*rf.box.Dy())
		if s := ps.coplanarSlab(p); s != nil {
			rf.outlines = ps.slabOutlines(p, s)
			fillPolys(rf.outlines, rf.box, rf.field)
			return rf
		}
		ps.rasterise(p, rf.box, rf.field)
		rf.outlines = traceBox(p, rf.field, rf.box)
	}
	return rf
}

// traceBox traces the 0.5 isoline of the box-local field (padded by one pixel
// of zeros so outlines close at the box edge) and returns it in plane
// pixel and patient coordinates.
func traceBox(p Plane, field []float32, box image.Rectangle) []Polyline {
	if box.Empty() {
		return nil
	}
	w, h := box.Dx()+2, box.Dy()+2
	sub := make([]float32, w*h)
	for y := box.Min.Y; y < box.Max.Y; y++ {
		copy(sub[(y-box.Min.Y+1)*w+1:], field[(y-box.Min.Y)*box.Dx():(y-box.Min.Y+1)*box.Dx()])
	}
	lines := MarchingSquares(sub, w, h, 0.5)
	ox, oy := float64(box.Min.X-1), float64(box.Min.Y-1)
	for n := range lines {
		pts := lines[n].Pixels
		lines[n].Patient = make([]dosemap.Vec3, len(pts))
		for m := range pts {
			pts[m].X += ox
			pts[m].Y += oy
			lines[n].Patient[m] = p.Point(pts[m].X, pts[m].Y)
		}
	}
	return lines
}

// fillPolys sets the box-local field to 1 at the pixel centres within box
// enclosed by the polylines (even-odd rule), by scanlines.
func fillPolys(lines []Polyline, box image.Rectangle, field []float32) {
	var xs []float64
	for y := box.Min.Y; y < box.Max.Y; y++ {
		fy := float64(y)
		xs = xs[:0]
		for _, l := range lines {
			pts := l.Pixels
			n := len(pts)
			for a, b := 0, n-1; a < n; b, a = a, a+1 {
				pa, pb := pts[a], pts[b]
				if (pa.Y > fy) != (pb.Y > fy) {
					xs = append(xs, pa.X+(fy-pa.Y)*(pb.X-pa.X)/(pb.Y-pa.Y))
				}
			}
		}
		slices.Sort(xs)
		for n := 0; n+1 < len(xs); n += 2 {
			x0 := max(box.Min.X, int(math.Ceil(xs[n])))
			x1 := min(box.Max.X-1, int(math.Floor(xs[n+1])))
			for x := x0; x <= x1; x++ {
				field[(y-box.Min.Y)*box.Dx()+x-box.Min.X] = 1
			}
		}
	}
}

package review

import (
	"fmt"
	"math"
	"sort"

	"dosecover/dosemap"
)

// A structure outlined by planar contours is turned into a solid by the slab
// model: every contour plane stands for the slab of tissue halfway to its
// neighbouring planes. The first and last planes extend half the spacing to
// their single neighbour beyond themselves; a structure drawn on one plane
// only stands for a slab of the thickness passed in (the slice spacing of
// the images it was drawn on). Several contours on one plane combine by the
// even-odd rule (a point inside an odd number of them is inside), so a
// contour drawn inside another cuts a hole. This is the usual reading of
// RTSTRUCT CLOSED_PLANAR contours (common practice).

// planeSolid is a structure prepared for point-in-solid tests.
type planeSolid struct {
	n, u, v vec3      // plane normal and in-plane axes (orthonormal)
	w       []float64 // plane positions along n, increasing
	lo, hi  []float64 // slab bounds along n for each plane
	polys   [][]poly2 // polygons of each plane in (u, v)
}

type vec3 = dosemap.Vec3

type poly2 struct {
	x, y                   []float64
	minX, maxX, minY, maxY float64
}

// newPlaneSolid prepares s. thickness is the slab thickness of a structure
// drawn on a single plane (mm).
func newPlaneSolid(s *dosemap.Structure, thickness float64) (*planeSolid, error) {
	// Normal from the contour with the largest area (Newell's method:
	// Newell 1972, in Sutherland et al., "A characterization of ten
	// hidden-surface algorithms", 1974).
	var n vec3
	best := 0.0
	for _, c := range s.Contours {
		if len(c.Points) < 3 {
			continue
		}
		nc := newellNormal(c.Points)
		if a := nc.Norm(); a > best {
			best, n = a, nc
		}
	}
	if best == 0 {
		return nil, fmt.Errorf("structure %q has no contour enclosing an area", s.Name)
	}
	n = n.Unit()
	// Orient the normal so it points along the largest component positive
	// (so plane positions sort the same way for either winding).
	if m := maxAbsAxis(n); n[m] < 0 {
		n = n.Scale(-1)
	}
	u := vec3{1, 0, 0}
	if math.Abs(n[0]) > 0.9 {
		u = vec3{0, 1, 0}
	}
	u = u.Sub(n.Scale(u.Dot(n))).Unit()
	v := n.Cross(u)
	type planar struct {
		w float64
		p poly2
	}
	var ps []planar
	for ci, c := range s.Contours {
		if len(c.Points) < 3 {
			continue
		}
		if nc := newellNormal(c.Points); nc.Norm() > 0 && math.Abs(nc.Unit().Dot(n)) < 0.999 {
			return nil, fmt.Errorf("structure %q: contour %d is not parallel to the others (normal %.3f,%.3f,%.3f)", s.Name, ci+1, nc.Unit()[0], nc.Unit()[1], nc.Unit()[2])
		}
		var w float64
		p := poly2{x: make([]float64, len(c.Points)), y: make([]float64, len(c.Points)),
			minX: math.Inf(1), minY: math.Inf(1), maxX: math.Inf(-1), maxY: math.Inf(-1)}
		for k, q := range c.Points {
			w += q.Dot(n)
			p.x[k], p.y[k] = q.Dot(u), q.Dot(v)
			p.minX, p.maxX = math.Min(p.minX, p.x[k]), math.Max(p.maxX, p.x[k])
			p.minY, p.maxY = math.Min(p.minY, p.y[k]), math.Max(p.maxY, p.y[k])
		}
		w /= float64(len(c.Points))
		for k, q := range c.Points {
			if d := math.Abs(q.Dot(n) - w); d > 0.5 {
				return nil, fmt.Errorf("structure %q: contour %d is not planar (point %d lies %.2f mm off its plane)", s.Name, ci+1, k+1, d)
			}
		}
		ps = append(ps, planar{w, p})
	}
	sort.SliceStable(ps, func(a, b int) bool { return ps[a].w < ps[b].w })
	sol := &planeSolid{n: n, u: u, v: v}
	const sameplane = 0.05 // mm: contours closer than this share a plane
	for _, p := range ps {
		if m := len(sol.w); m > 0 && p.w-sol.w[m-1] < sameplane {
			sol.polys[m-1] = append(sol.polys[m-1], p.p)
			continue
		}
		sol.w = append(sol.w, p.w)
		sol.polys = append(sol.polys, []poly2{p.p})
	}
	m := len(sol.w)
	sol.lo = make([]float64, m)
	sol.hi = make([]float64, m)
	for k := range sol.w {
		switch {
		case m == 1:
			sol.lo[k], sol.hi[k] = sol.w[k]-thickness/2, sol.w[k]+thickness/2
			continue
		case k == 0:
			sol.lo[k] = sol.w[0] - (sol.w[1]-sol.w[0])/2
		default:
			sol.lo[k] = (sol.w[k-1] + sol.w[k]) / 2
		}
		if k == m-1 {
			sol.hi[k] = sol.w[k] + (sol.w[k]-sol.w[k-1])/2
		} else {
			sol.hi[k] = (sol.w[k] + sol.w[k+1]) / 2
		}
	}
	return sol, nil
}

func newellNormal(pts []vec3) vec3 {
	var n vec3
	for a := range pts {
		p, q := pts[a], pts[(a+1)%len(pts)]
		n[0] += (p[1] - q[1]) * (p[2] + q[2])
		n[1] += (p[2] - q[2]) * (p[0] + q[0])
		n[2] += (p[0] - q[0]) * (p[1] + q[1])
	}
	return n
}

func maxAbsAxis(v vec3) int {
	m := 0
	for a := 1; a < 3; a++ {
		if math.Abs(v[a]) > math.Abs(v[m]) {
			m = a
		}
	}
	return m
}

// inside reports whether patient point p lies inside the solid.
func (s *planeSolid) inside(p vec3) bool {
	w := p.Dot(s.n)
	if w < s.lo[0] || w >= s.hi[len(s.hi)-1] {
		return false
	}
	k := sort.SearchFloat64s(s.hi, w) // first slab with hi >= w
	if k < len(s.hi) && s.hi[k] == w {
		k++
	}
	if k >= len(s.hi) || w < s.lo[k] {
		return false
	}
	x, y := p.Dot(s.u), p.Dot(s.v)
	in := false
	for _, pg := range s.polys[k] {
		if x < pg.minX || x > pg.maxX || y < pg.minY || y > pg.maxY {
			continue
		}
		if pointInPolygon(pg.x, pg.y, x, y) {
			in = !in
		}
	}
	return in
}

// pointInPolygon is the crossing-number test (even-odd rule; W. R.
// Franklin, PNPOLY, 1970s; Haines, "Point in polygon strategies",
// Graphics Gems IV, 1994).
func pointInPolygon(px, py []float64, x, y float64) bool {
	in := false
	n := len(px)
	for a, b := 0, n-1; a < n; b, a = a, a+1 {
		if (py[a] > y) != (py[b] > y) &&
			x < (px[b]-px[a])*(y-py[a])/(py[b]-py[a])+px[a] {
			in = !in
		}
	}
	return in
}

// corners returns patient points bounding the solid (polygon vertices at
// both faces of their slab).
func (s *planeSolid) corners() []vec3 {
	var out []vec3
	for k := range s.w {
		for _, pg := range s.polys[k] {
			for _, w := range []float64{s.lo[k], s.hi[k]} {
				for _, xy := range [4][2]float64{{pg.minX, pg.minY}, {pg.maxX, pg.minY}, {pg.minX, pg.maxY}, {pg.maxX, pg.maxY}} {
					out = append(out, s.u.Scale(xy[0]).Add(s.v.Scale(xy[1])).Add(s.n.Scale(w)))
				}
			}
		}
	}
	return out
}

// SubSamples is the number of sample points per axis with which Occupancy
// measures the part of a boundary voxel inside a structure (SubSamples³
// samples per voxel).
const SubSamples = 4

// Occupancy returns, for every voxel of g, the fraction of the voxel inside
// structure s (0..1). Every contour plane of s stands for the slab halfway
// to its neighbouring planes; the end planes extend half the spacing to
// their neighbour beyond themselves, and a structure on a single plane is a
// slab of the given thickness. Contours on one plane combine by the
// even-odd rule (a contour inside another cuts a hole). Voxels whose centre classification differs from
// any of their 26 neighbours are measured with SubSamples³ regularly placed
// points; the others are wholly in or out. thickness is the slab thickness
// of a structure drawn on one plane only (mm).
func Occupancy(s *dosemap.Structure, g dosemap.Geometry, thickness float64) ([]float32, error) {
	if err := g.Validate(); err != nil {
		return nil, fmt.Errorf("structure %q: analysis grid: %w", s.Name, err)
	}
	sol, err := newPlaneSolid(s, thickness)
	if err != nil {
		return nil, err
	}
	out := make([]float32, g.Len())
	lo, hi := [3]int{}, [3]int{}
	first := true
	for _, c := range sol.corners() {
		i, j, k := g.Voxel(c)
		f := [3]float64{i, j, k}
		for a := 0; a < 3; a++ {
			l, h := int(math.Floor(f[a]))-1, int(math.Ceil(f[a]))+1
			if first || l < lo[a] {
				lo[a] = l
			}
			if first || h > hi[a] {
				hi[a] = h
			}
		}
		first = false
	}
	dims := [3]int{g.Cols, g.Rows, g.Slices}
	for a := 0; a < 3; a++ {
		lo[a] = max(lo[a], 0)
		hi[a] = min(hi[a], dims[a]-1)
		if lo[a] > hi[a] {
			return out, nil // entirely outside the grid
		}
	}
	nx, ny, nz := hi[0]-lo[0]+1, hi[1]-lo[1]+1, hi[2]-lo[2]+1
	centre := make([]bool, nx*ny*nz)
	at := func(i, j, k int) int { return ((k-lo[2])*ny+(j-lo[1]))*nx + (i - lo[0]) }
	for k := lo[2]; k <= hi[2]; k++ {
		for j := lo[1]; j <= hi[1]; j++ {
			for i := lo[0]; i <= hi[0]; i++ {
				centre[at(i, j, k)] = sol.inside(g.Point(float64(i), float64(j), float64(k)))
			}
		}
	}
	const ns = SubSamples
	for k := lo[2]; k <= hi[2]; k++ {
		for j := lo[1]; j <= hi[1]; j++ {
			for i := lo[0]; i <= hi[0]; i++ {
				c := centre[at(i, j, k)]
				border := false
				for dk := -1; dk <= 1 && !border; dk++ {
					for dj := -1; dj <= 1 && !border; dj++ {
						for di := -1; di <= 1; di++ {
							a, b, e := i+di, j+dj, k+dk
							var nb bool
							if a >= lo[0] && a <= hi[0] && b >= lo[1] && b <= hi[1] && e >= lo[2] && e <= hi[2] {
								nb = centre[at(a, b, e)]
							} else {
								nb = sol.inside(g.Point(float64(a), float64(b), float64(e)))
							}
							if nb != c {
								border = true
								break
							}
						}
					}
				}
				idx := g.Index(i, j, k)
				if !border {
					if c {
						out[idx] = 1
					}
					continue
				}
				cnt := 0
				for sk := 0; sk < ns; sk++ {
					fk := float64(k) + (float64(sk)+0.5)/ns - 0.5
					for sj := 0; sj < ns; sj++ {
						fj := float64(j) + (float64(sj)+0.5)/ns - 0.5
						for si := 0; si < ns; si++ {
							fi := float64(i) + (float64(si)+0.5)/ns - 0.5
							if sol.inside(g.Point(fi, fj, fk)) {
								cnt++
							}
						}
					}
				}
				out[idx] = float32(cnt) / (ns * ns * ns)
			}
		}
	}
	return out, nil
}

package report

import (
	"math"

	"dosecover/dosemap"
	"dosecover/review"
	"dosecover/review/view"
)

// measuredSlice is one acquired thermometry slice: slice K of a stack of
// sonication Sonication.
type measuredSlice struct {
	Stack      dosemap.Geometry
	K          int
	Sonication int
	Voxels     float64 // weight of the region's voxels it measured
	DistanceMM float64 // of the region's centroid from its centre plane
}

// ownPlanes returns the stacks of the included sonications of c when they
// were measured on planes of their own (view.CaseStacks), else nil: on one
// shared slab every plane through the slab is measured and the panels
// need no choice.
func ownPlanes(c *dosemap.Case, r *review.Result) []measuredSlice {
	excluded := map[int]bool{}
	for _, n := range r.Settings.Excluded {
		excluded[n] = true
	}
	var out []measuredSlice
	for _, st := range view.CaseStacks(c, 0) {
		if !excluded[st.Sonication] {
			out = append(out, measuredSlice{Stack: st.Geometry, Sonication: st.Sonication})
		}
	}
	return out
}

// bestMeasuredSlice returns the acquired slice of the stacks that measured
// most of a region of the analysis grid (the weights of its voxels,
// weight(value) of each voxel of vol, summed; a
// voxel is measured by slice k of a stack when it lies within half a slice
// step of the slice's centre plane and inside its field of view, as
// dosemap.Resample takes a stack's dose), ties going to the slice nearest
// the centroid. When no slice measured any of the region, it returns the
// slice nearest the centroid among those whose field of view holds the
// centroid's projection, with Voxels 0; ok is false when there is none.
//
// Slices in the plane of any slice of skip are left out.
func bestMeasuredSlice(stacks []measuredSlice, vol *dosemap.Volume, weight func(float32) float64, centroid dosemap.Vec3, skip []measuredSlice) (best measuredSlice, ok bool) {
	if vol == nil {
		return best, false
	}
	lg := vol.Geometry
	var pts []dosemap.Vec3
	var ws []float64
	for n, v := range vol.Data {
		if w := weight(v); w > 0 {
			i, j, k := lg.IJK(n)
			pts = append(pts, lg.Point(float64(i), float64(j), float64(k)))
			ws = append(ws, w)
		}
	}
	type key struct{ s, k int }
	count := map[key]float64{}
	for s, st := range stacks {
		g := st.Stack
		for m, p := range pts {
			i, j, k := g.Voxel(p)
			kr := math.Round(k)
			if i < -0.5 || i > float64(g.Cols)-0.5 || j < -0.5 || j > float64(g.Rows)-0.5 || kr < 0 || kr > float64(g.Slices-1) || math.Abs(k-kr) > 0.5 {
				continue
			}
			count[key{s, int(kr)}] += ws[m]
		}
	}
	bestD := math.Inf(1)
	for s, st := range stacks {
		g := st.Stack
		for k := 0; k < g.Slices; k++ {
			if inPlaneOf(skip, g, k) {
				continue
			}
			c := count[key{s, k}]
			i, j, kk := g.Voxel(centroid)
			d := math.Abs(kk-float64(k)) * g.Spacing[2]
			if c == 0 && (i < -0.5 || i > float64(g.Cols)-0.5 || j < -0.5 || j > float64(g.Rows)-0.5) {
				continue // the centroid's projection lies outside its field of view
			}
			if !ok || c > best.Voxels+1e-9 || (math.Abs(c-best.Voxels) <= 1e-9 && d < bestD) {
				best = measuredSlice{Stack: g, K: k, Sonication: st.Sonication, Voxels: c, DistanceMM: d}
				bestD, ok = d, true
			}
		}
	}
	return best, ok
}

// labelWeight weighs the voxels of one label of a label volume.
func labelWeight(label int) func(float32) float64 {
	return func(v float32) float64 {
		if v == float32(label) {
			return 1
		}
		return 0
	}
}

// fractionWeight weighs the voxels of a fraction mask by their fraction.
func fractionWeight(v float32) float64 {
	if v > 0 {
		return float64(v)
	}
	return 0
}

// parallelTo returns the slices of stacks whose slices are parallel to
// normal n (within about 2.6°, as review.PlaneOrientation names planes).
func parallelTo(stacks []measuredSlice, n dosemap.Vec3) []measuredSlice {
	var out []measuredSlice
	for _, st := range stacks {
		if math.Abs(st.Stack.Normal.Unit().Dot(n.Unit())) >= 0.999 {
			out = append(out, st)
		}
	}
	return out
}

// notParallelTo returns the slices of stacks whose slices are parallel to
// none of the slices of shown (within about 2.6°, as parallelTo): planes
// across those already shown.
func notParallelTo(stacks, shown []measuredSlice) []measuredSlice {
	var out []measuredSlice
next:
	for _, st := range stacks {
		for _, sh := range shown {
			if math.Abs(st.Stack.Normal.Unit().Dot(sh.Stack.Normal.Unit())) >= 0.999 {
				continue next
			}
		}
		out = append(out, st)
	}
	return out
}

// inPlaneOf reports whether slice k of g lies in the plane of any slice
// of skip (coplanar).
func inPlaneOf(skip []measuredSlice, g dosemap.Geometry, k int) bool {
	for _, ms := range skip {
		if coplanar(ms, g, k) {
			return true
		}
	}
	return false
}

// inShown reports whether plane pl lies in the plane of a slice of shown:
// the same normal (within about 0.08°) and within 0.1 mm, as coplanar.
func inShown(shown []measuredSlice, pl view.Plane) bool {
	n := pl.Normal()
	for _, ms := range shown {
		if math.Abs(ms.Stack.Normal.Unit().Dot(n)) >= 1-1e-6 && math.Abs(pl.Distance(ms.Stack.Point(0, 0, float64(ms.K)))) <= 0.1 {
			return true
		}
	}
	return false
}

// coplanar reports whether slice k of g lies in the plane of slice ms:
// the same normal (within about 0.08°) and centre planes within 0.1 mm.
func coplanar(ms measuredSlice, g dosemap.Geometry, k int) bool {
	n := ms.Stack.Normal.Unit()
	if math.Abs(g.Normal.Unit().Dot(n)) < 1-1e-6 {
		return false
	}
	return math.Abs(g.Point(0, 0, float64(k)).Sub(ms.Stack.Point(0, 0, float64(ms.K))).Dot(n)) <= 0.1
}

// sharing returns the numbers of the sonications (in stacks' order, each
// once) that measured the very plane of slice ms: a slice with the same
// normal whose centre plane lies within 0.1 mm of it (many sonications of
// a session can share a plane through a row of foci).
func sharing(stacks []measuredSlice, ms measuredSlice) []int {
	var out []int
	seen := map[int]bool{}
	for _, st := range stacks {
		for k := 0; k < st.Stack.Slices; k++ {
			if coplanar(ms, st.Stack, k) && !seen[st.Sonication] {
				seen[st.Sonication] = true
				out = append(out, st.Sonication)
			}
		}
	}
	return out
}

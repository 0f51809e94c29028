package review

import (
	"math"

	"dosecover/dosemap"
)

// keepBox is the block of thermometry voxels whose temperatures a session
// keeps for the Monte Carlo when the case's frames stay in their files: every
// coarse voxel the uncertainty can need (the interpolation taps of the
// target and of the largest margin) lies inside it, so the series need not
// be kept whole. Bounds are inclusive, in coarse voxel indices.
type keepBox struct {
	g      dosemap.Geometry // the coarse grid
	lo, hi [3]int
	sub    dosemap.Geometry // the block as a grid of its own
	ids    []int            // coarse index of each voxel of sub
}

// newKeepBox returns the block of grid g holding the patient points ext
// (the target's bounding box already enlarged by the largest margin and two
// voxel diagonals, as for the analysis grid) and the taps around them: one
// voxel in-plane, two slices across.
func newKeepBox(g dosemap.Geometry, ext []vec3) *keepBox {
	lo := [3]float64{math.Inf(1), math.Inf(1), math.Inf(1)}
	hi := [3]float64{math.Inf(-1), math.Inf(-1), math.Inf(-1)}
	for _, p := range ext {
		i, j, k := g.Voxel(p)
		for a, x := range [3]float64{i, j, k} {
			lo[a], hi[a] = math.Min(lo[a], x), math.Max(hi[a], x)
		}
	}
	b := &keepBox{g: g}
	dims := [3]int{g.Cols, g.Rows, g.Slices}
	pad := [3]int{1, 1, 2}
	for a := 0; a < 3; a++ {
		b.lo[a] = max(0, min(dims[a]-1, int(math.Floor(lo[a]))-pad[a]))
		b.hi[a] = max(0, min(dims[a]-1, int(math.Ceil(hi[a]))+pad[a]))
	}
	b.sub = g
	b.sub.Cols, b.sub.Rows, b.sub.Slices = b.hi[0]-b.lo[0]+1, b.hi[1]-b.lo[1]+1, b.hi[2]-b.lo[2]+1
	b.sub.Origin = g.Point(float64(b.lo[0]), float64(b.lo[1]), float64(b.lo[2]))
	b.ids = make([]int, 0, b.sub.Len())
	for k := b.lo[2]; k <= b.hi[2]; k++ {
		for j := b.lo[1]; j <= b.hi[1]; j++ {
			for i := b.lo[0]; i <= b.hi[0]; i++ {
				b.ids = append(b.ids, g.Index(i, j, k))
			}
		}
	}
	return b
}

// index returns the index in the block of coarse voxel n, -1 outside it.
func (b *keepBox) index(n int) int {
	i, j, k := b.g.IJK(n)
	if i < b.lo[0] || i > b.hi[0] || j < b.lo[1] || j > b.hi[1] || k < b.lo[2] || k > b.hi[2] {
		return -1
	}
	return b.sub.Index(i-b.lo[0], j-b.lo[1], k-b.lo[2])
}

// crop returns the part of ts inside the block (frames, noise and times;
// frame quality is left out, it describes whole frames).
func (b *keepBox) crop(ts *dosemap.TemperatureSeries) *dosemap.TemperatureSeries {
	out := &dosemap.TemperatureSeries{Geometry: b.sub, Times: ts.Times, Frames: make([][]float32, len(ts.Frames))}
	n := b.sub.Len()
	slab := make([]float32, n*len(ts.Frames))
	pick := func(src, dst []float32) {
		q := 0
		for k := b.lo[2]; k <= b.hi[2]; k++ {
			for j := b.lo[1]; j <= b.hi[1]; j++ {
				row := b.g.Index(b.lo[0], j, k)
				q += copy(dst[q:], src[row:row+b.sub.Cols])
			}
		}
	}
	for f, fr := range ts.Frames {
		out.Frames[f] = slab[f*n : (f+1)*n : (f+1)*n]
		pick(fr, out.Frames[f])
	}
	if ts.Sigma != nil {
		out.Sigma = make([]float32, n)
		pick(ts.Sigma, out.Sigma)
	}
	return out
}

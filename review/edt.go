package review

import (
	"math"

	"dosecover/dosemap"
)

// SquaredDistance returns, for every voxel of g, the squared Euclidean
// distance (mm²) from its centre to the centre of the nearest voxel with
// mask true; +Inf when mask has no true voxel. Spacing may differ per axis.
//
// It is the exact separable transform of Felzenszwalb & Huttenlocher,
// "Distance transforms of sampled functions", Theory of Computing 8 (2012)
// 415–428: along each axis in turn
//
//	D(p) = min_q ( (p-q)²·h² + f(q) )
//
// is the lower envelope of parabolas rooted at (q, f(q)), found in linear
// time; three passes (i, j, k) give the 3-D squared distance. The grid is
// treated as orthogonal (Row, Col, Normal perpendicular), as thermometry
// stacks are.
func SquaredDistance(g dosemap.Geometry, mask []bool) []float64 {
	if len(mask) != g.Len() {
		panic("review: SquaredDistance: mask length does not match the grid")
	}
	d := make([]float64, len(mask))
	for n, m := range mask {
		if !m {
			d[n] = math.Inf(1)
		}
	}
	edt3(d, [3]int{g.Cols, g.Rows, g.Slices}, [3]float64(g.Spacing))
	return d
}

// Distance returns the distance (mm) from every voxel centre of g to the
// nearest voxel centre in mask, as float32; see SquaredDistance.
func Distance(g dosemap.Geometry, mask []bool) []float32 {
	d := SquaredDistance(g, mask)
	out := make([]float32, len(d))
	for n, x := range d {
		out[n] = float32(math.Sqrt(x))
	}
	return out
}

// edt3 transforms d (squared distances, 0 on features, +Inf elsewhere) in
// place along the three axes of a grid of dims voxels with spacing h.
func edt3(d []float64, dims [3]int, h [3]float64) {
	nmax := max(dims[0], dims[1], dims[2])
	f := make([]float64, nmax)
	out := make([]float64, nmax)
	v := make([]int, nmax)
	z := make([]float64, nmax+1)
	nx, ny, nz := dims[0], dims[1], dims[2]
	// Axis 0 (i, contiguous).
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			base := (k*ny + j) * nx
			copy(f[:nx], d[base:base+nx])
			edt1(f[:nx], out[:nx], h[0], v, z)
			copy(d[base:base+nx], out[:nx])
		}
	}
	// Axis 1 (j, stride nx).
	for k := 0; k < nz; k++ {
		for i := 0; i < nx; i++ {
			base := k*ny*nx + i
			for j := 0; j < ny; j++ {
				f[j] = d[base+j*nx]
			}
			edt1(f[:ny], out[:ny], h[1], v, z)
			for j := 0; j < ny; j++ {
				d[base+j*nx] = out[j]
			}
		}
	}
	// Axis 2 (k, stride nx*ny).
	if nz > 1 {
		s := nx * ny
		for n := 0; n < s; n++ {
			for k := 0; k < nz; k++ {
				f[k] = d[n+k*s]
			}
			edt1(f[:nz], out[:nz], h[2], v, z)
			for k := 0; k < nz; k++ {
				d[n+k*s] = out[k]
			}
		}
	}
}

// edt1 is the one-dimensional lower envelope of parabolas
// (Felzenszwalb & Huttenlocher 2012, algorithm DT(f)), with sample
// positions q·h. Samples with f = +Inf root no parabola.
func edt1(f, out []float64, h float64, v []int, z []float64) {
	n := len(f)
	k := -1
	for q := 0; q < n; q++ {
		if math.IsInf(f[q], 1) {
			continue
		}
		xq := float64(q) * h
		for k >= 0 {
			xv := float64(v[k]) * h
			s := ((f[q] + xq*xq) - (f[v[k]] + xv*xv)) / (2 * (xq - xv))
			if s <= z[k] {
				k--
				continue
			}
			k++
			v[k] = q
			z[k] = s
			z[k+1] = math.Inf(1)
			break
		}
		if k < 0 {
			k = 0
			v[0] = q
			z[0] = math.Inf(-1)
			z[1] = math.Inf(1)
		}
	}
	if k < 0 {
		for q := range out {
			out[q] = math.Inf(1)
		}
		return
	}
	m := 0
	for q := 0; q < n; q++ {
		x := float64(q) * h
		for z[m+1] < x {
			m++
		}
		dx := x - float64(v[m])*h
		out[q] = dx*dx + f[v[m]]
	}
}

package view

import (
	"image"
	"math"

	"dosecover/dosemap"
)

// Sample returns vol sampled at the pixel centres of p: Width*Height values,
// row by row (index y*Width + x). Values follow dosemap.Volume.Sample
// exactly — trilinear interpolation, half a voxel of edge extension, NaN
// outside the grid and wherever interpolation touches a NaN voxel. A nil or
// inconsistent volume gives all NaN.
func Sample(vol *dosemap.Volume, p Plane) []float32 {
	dst := make([]float32, p.Len())
	SampleInto(dst, vol, p)
	return dst
}

// SampleInto is Sample writing into dst, which must hold at least p.Len()
// values; it allocates nothing.
//
// The voxel coordinate is affine in the pixel coordinate, so each row is
// clipped against the grid once (slab method) and then stepped with three
// additions per pixel; planes lying in a slice of the grid take a bilinear
// path with four taps instead of eight. Voxel coordinates within 1e-6 of a
// voxel centre are snapped onto it, so an acquisition plane reproduces its
// slice exactly even next to NaN voxels.
func SampleInto(dst []float32, vol *dosemap.Volume, p Plane) {
	sampleRect(dst, p.Width, image.Point{}, vol, p, image.Rect(0, 0, p.Width, p.Height), float32(math.NaN()))
}

// sampleRect samples vol on the pixels of p inside r (clipped to the plane)
// into dst, where pixel (x, y) goes to (y-org.Y)*stride + x-org.X, writing
// fill at pixels outside the volume's grid. Pixels of dst outside r are left
// alone.
func sampleRect(dst []float32, stride int, org image.Point, vol *dosemap.Volume, p Plane, r image.Rectangle, fill float32) {
	r = r.Intersect(image.Rect(0, 0, p.Width, p.Height))
	if r.Empty() {
		return
	}

	if vol == nil || vol.Check() != nil || vol.Len() == 0 {
		for y := r.Min.Y; y < r.Max.Y; y++ {
			row := dst[(y-org.Y)*stride+r.Min.X-org.X : (y-org.Y)*stride+r.Max.X-org.X]
			for n := range row {
				row[n] = fill
			}
		}
		return
	}
	// Voxel coordinate c(x, y) = c0 + x*du + y*dv.
	var c0, du, dv [3]float64
	c0[0], c0[1], c0[2] = vol.Voxel(p.Point(0, 0))
	a0, a1, a2 := vol.Voxel(p.Point(1, 0))
	b0, b1, b2 := vol.Voxel(p.Point(0, 1))
	du = [3]float64{a0 - c0[0], a1 - c0[1], a2 - c0[2]}
	dv = [3]float64{b0 - c0[0], b1 - c0[1], b2 - c0[2]}
	n := [3]int{vol.Cols, vol.Rows, vol.Slices}
	// Strides to the upper neighbour along each axis; 0 on a one-voxel axis
	// (its weight is always 0 there).
	var st [3]int
	if n[0] > 1 {
		st[0] = 1
	}
	if n[1] > 1 {
		st[1] = n[0]
	}
	if n[2] > 1 {
		st[2] = n[0] * n[1]
	}
	data := vol.Data
	// aligned: one plane pixel to the right is one voxel along i.
	aligned := math.Abs(du[0]-1) < 1e-9 && math.Abs(du[1]) < 1e-9 && math.Abs(du[2]) < 1e-9
	if aligned {
		du = [3]float64{1, 0, 0}
	}
	for y := r.Min.Y; y < r.Max.Y; y++ {
		fy := float64(y)
		base := [3]float64{c0[0] + fy*dv[0], c0[1] + fy*dv[1], c0[2] + fy*dv[2]}
		lo, hi := float64(r.Min.X), float64(r.Max.X-1)
		for a := 0; a < 3; a++ {
			lim := float64(n[a]) - 0.5
			if du[a] == 0 {
				if !(base[a] >= -0.5 && base[a] <= lim) {
					lo, hi = 1, 0
				}
				continue
			}
			t0 := (-0.5 - base[a]) / du[a]
			t1 := (lim - base[a]) / du[a]
			if t0 > t1 {
				t0, t1 = t1, t0
			}
			lo = math.Max(lo, math.Ceil(t0-1e-9))
			hi = math.Min(hi, math.Floor(t1+1e-9))
		}
		// out[x-xo] is plane pixel (x, y).
		xo := r.Min.X
		out := dst[(y-org.Y)*stride+xo-org.X : (y-org.Y)*stride+r.Max.X-org.X]
		x0, x1 := r.Min.X, r.Min.X // [x0, x1) is sampled
		if lo <= hi {
			x0, x1 = int(lo), int(hi)+1
		}
		for x := r.Min.X; x < x0; x++ {
			out[x-xo] = fill
		}
		for x := x1; x < r.Max.X; x++ {
			out[x-xo] = fill
		}
		if x0 >= x1 {
			continue
		}
		// A row running along a grid row through voxel centres is a copy.
		if ci, cj, ck := snap(base[0]+float64(x0)*du[0]), snap(base[1]), snap(base[2]); aligned &&
			ci == math.Trunc(ci) && cj == math.Trunc(cj) && ck == math.Trunc(ck) {
			m := (int(ck)*n[1]+int(cj))*n[0] + int(ci)
			copy(out[x0-xo:x1-xo], data[m:m+x1-x0])
			continue
		}
		// A row lying in one slice of the grid takes the bilinear path.
		kc := clampf(snap(base[2]+float64(x0)*du[2]), n[2])
		k0, fz := splitf(kc, n[2])
		flat := du[2] == 0 && fz == 0
		for x := x0; x < x1; x++ {
			fx := float64(x)
			ci := base[0] + fx*du[0]
			cj := base[1] + fx*du[1]
			ck := base[2] + fx*du[2]
			i0, wx := splitf(clampf(ci, n[0]), n[0])
			j0, wy := splitf(clampf(cj, n[1]), n[1])
			var v float64
			if flat {
				m := (k0*n[1]+j0)*n[0] + i0
				top := float64(data[m])*(1-wx) + float64(data[m+st[0]])*wx
				bot := float64(data[m+st[1]])*(1-wx) + float64(data[m+st[1]+st[0]])*wx
				v = top*(1-wy) + bot*wy
			} else {
				kk, wz := splitf(clampf(ck, n[2]), n[2])
				m := (kk*n[1]+j0)*n[0] + i0
				top := float64(data[m])*(1-wx) + float64(data[m+st[0]])*wx
				bot := float64(data[m+st[1]])*(1-wx) + float64(data[m+st[1]+st[0]])*wx
				s0 := top*(1-wy) + bot*wy
				m += st[2]
				top = float64(data[m])*(1-wx) + float64(data[m+st[0]])*wx
				bot = float64(data[m+st[1]])*(1-wx) + float64(data[m+st[1]+st[0]])*wx
				s1 := top*(1-wy) + bot*wy
				v = s0*(1-wz) + s1*wz
			}
			if v != v {
				// A NaN tap: Volume.SampleVoxel skips taps of zero
				// weight, which decides whether this pixel is NaN.
				out[x-xo] = vol.SampleVoxel(snap(ci), snap(cj), snap(ck))
				continue
			}
			out[x-xo] = float32(v)
		}
	}
}

// snapTol is the distance (voxels) within which a coordinate is taken to
// be on a voxel centre, so that rounding in the plane-to-grid mapping
// cannot give weight to a NaN neighbour of a valid voxel.
const snapTol = 1e-6

// snap rounds x to the nearest integer when it lies within snapTol of it.
func snap(x float64) float64 {
	if r := math.Round(x); math.Abs(x-r) < snapTol {
		return r
	}
	return x
}

// clampf clamps a continuous index to [0, n-1]; the caller has already
// checked that it lies within half a voxel of that range.
func clampf(x float64, n int) float64 {
	if x < 0 {
		return 0
	}
	if m := float64(n - 1); x > m {
		return m
	}
	return x
}

// splitf returns the lower neighbour and the weight of the upper one, with
// the lower neighbour at most n-2 so that both taps are inside the grid
// (on a one-voxel axis, 0 and 0).
func splitf(x float64, n int) (int, float64) {
	i := int(x)
	if i > n-2 {
		i = n - 2
	}
	if i < 0 {
		return 0, 0
	}
	return i, x - float64(i)
}

package review

import (
	"math"

	"dosecover/dosemap"
)

// The analysis grid.
//
// Thermometry is sampled at about 1.25×1.25 mm in plane but 3 mm or more
// across slices, too coarse across slices to measure a 20 mm target to a
// percent. The analysis therefore works on a finer grid: the thermometry
// grid with every slice divided into RefineSlices(spacing) thinner slices
// (at most MaxAnalysisStep mm thick), in-plane voxels unchanged, extended
// in every direction where needed to hold the target and its largest
// margin. Dose on the fine grid is interpolated from the thermometry
// voxels across slices only, by cubic convolution (Keys, "Cubic convolution
// interpolation for digital image processing", IEEE Trans ASSP 29(6), 1981;
// a = -1/2) of the logarithm of the dose: thermal dose grows exponentially
// with temperature and temperature is smooth, so log-dose is the smoother
// quantity. Where a cubic tap is unmeasured the interpolation falls back to
// linear between the two nearest slices. Fine voxels beyond half a
// thermometry voxel outside the thermometry grid are not monitored.

// MaxAnalysisStep is the largest slice thickness of the analysis grid, mm.
const MaxAnalysisStep = 1.0

// RefineSlices returns how many analysis slices one thermometry slice of
// thickness dz (mm) is divided into.
func RefineSlices(dz float64) int {
	return max(1, int(math.Ceil(dz/MaxAnalysisStep-1e-9)))
}

// logFloor is the dose below which log-dose is clamped (CEM43 minutes);
// far below any threshold of interest.
const logFloor = 1e-12

// fineGrid maps an analysis grid onto the thermometry (coarse) grid.
type fineGrid struct {
	coarse, fine   dosemap.Geometry
	rz             int
	i0, j0         int // coarse i, j of fine column 0, row 0
	slices         []sliceTaps
	inPlaneCoarseN int
}

// sliceTaps are the coarse slices and weights of one fine slice.
type sliceTaps struct {
	valid   bool
	k       [4]int
	w       [4]float32
	lk      [2]int // linear fallback
	lw      [2]float32
	nearest int
}

// newFineGrid builds the analysis grid for coarse grid c, extended to hold
// the patient points ext (already enlarged by the margin).
func newFineGrid(c dosemap.Geometry, ext []vec3) *fineGrid {
	rz := RefineSlices(c.Spacing[2])
	lo := [3]float64{0, 0, -0.5}
	hi := [3]float64{float64(c.Cols - 1), float64(c.Rows - 1), float64(c.Slices) - 0.5}
	for _, p := range ext {
		i, j, k := c.Voxel(p)
		f := [3]float64{i, j, k}
		for a := 0; a < 3; a++ {
			lo[a] = math.Min(lo[a], f[a])
			hi[a] = math.Max(hi[a], f[a])
		}
	}
	i0 := int(math.Floor(lo[0]))
	i1 := int(math.Ceil(hi[0]))
	j0 := int(math.Floor(lo[1]))
	j1 := int(math.Ceil(hi[1]))
	// Fine slices tile the coarse slabs: fine slice f spans coarse
	// [kStart + f/rz, kStart + (f+1)/rz].
	below := int(math.Ceil((-0.5 - lo[2]) * float64(rz)))
	above := int(math.Ceil((hi[2] - (float64(c.Slices) - 0.5)) * float64(rz)))
	below, above = max(below, 0), max(above, 0)
	nz := below + c.Slices*rz + above
	kStart := -0.5 - float64(below)/float64(rz)
	fg := &fineGrid{coarse: c, rz: rz, i0: i0, j0: j0}
	fg.fine = dosemap.Geometry{
		Cols: i1 - i0 + 1, Rows: j1 - j0 + 1, Slices: nz,
		Spacing: vec3{c.Spacing[0], c.Spacing[1], c.Spacing[2] / float64(rz)},
		Origin:  c.Point(float64(i0), float64(j0), kStart+0.5/float64(rz)),
		Row:     c.Row, Col: c.Col, Normal: c.Normal,
	}
	fg.slices = make([]sliceTaps, nz)
	S := c.Slices
	for f := range fg.slices {
		kc := kStart + (float64(f)+0.5)/float64(rz)
		st := &fg.slices[f]
		if kc < -0.5 || kc > float64(S)-0.5 {
			continue
		}
		st.valid = true
		kc = math.Max(0, math.Min(float64(S-1), kc))
		k0 := int(math.Floor(kc))
		t := kc - float64(k0)
		if k0 >= S-1 {
			k0, t = S-1, 0
		}
		st.nearest = k0
		if t > 0.5 {
			st.nearest = k0 + 1
		}
		t2, t3 := t*t, t*t*t
		w := [4]float64{
			(-t3 + 2*t2 - t) / 2,
			(3*t3 - 5*t2 + 2) / 2,
			(-3*t3 + 4*t2 + t) / 2,
			(t3 - t2) / 2,
		}
		for a := 0; a < 4; a++ {
			st.k[a] = min(max(k0-1+a, 0), S-1)
			st.w[a] = float32(w[a])
		}
		st.lk = [2]int{k0, min(k0+1, S-1)}
		st.lw = [2]float32{float32(1 - t), float32(t)}
	}
	return fg
}

// coarseIndex returns the coarse in-plane offset (j*Cols+i) of fine column
// fi, row fj, or -1 outside the coarse grid.
func (fg *fineGrid) coarseIndex(fi, fj int) int {
	i, j := fi+fg.i0, fj+fg.j0
	if i < 0 || j < 0 || i >= fg.coarse.Cols || j >= fg.coarse.Rows {
		return -1
	}
	return j*fg.coarse.Cols + i
}

// interpLog fills out (fine grid) with the interpolated log-dose of coarse
// log-dose lc and mon with whether the fine voxel is monitored: the
// interpolated value is valid and every coarse voxel of the linear stencil
// is fully measured (full).
func (fg *fineGrid) interpLog(lc []float32, full []bool, out []float32, mon []bool) {
	nan := float32(math.NaN())
	cs := fg.coarse.SliceLen()
	n := 0
	for f := 0; f < fg.fine.Slices; f++ {
		st := &fg.slices[f]
		for fj := 0; fj < fg.fine.Rows; fj++ {
			for fi := 0; fi < fg.fine.Cols; fi++ {
				c := -1
				if st.valid {
					c = fg.coarseIndex(fi, fj)
				}
				if c < 0 {
					out[n], mon[n] = nan, false
					n++
					continue
				}
				var s float32
				ok := true
				for a := 0; a < 4; a++ {
					if st.w[a] == 0 {
						continue
					}
					v := lc[st.k[a]*cs+c]
					if v != v {
						ok = false
						break
					}
					s += st.w[a] * v
				}
				m := true
				if !ok {
					s = 0
					ok = true
					for a := 0; a < 2; a++ {
						if st.lw[a] == 0 {
							continue
						}
						v := lc[st.lk[a]*cs+c]
						if v != v {
							ok = false
							break
						}
						s += st.lw[a] * v
					}
				}
				for a := 0; a < 2; a++ {
					if st.lw[a] != 0 && !full[st.lk[a]*cs+c] {
						m = false
					}
				}
				if !ok {
					s, m = nan, false
				}
				out[n], mon[n] = s, m
				n++
			}
		}
	}
}

// linearAt returns the interpolated value at fine voxel n of a coarse field v
// (linear-domain, NaN treated as 0), with the linear stencil.
func (fg *fineGrid) linearAt(v []float32, n int) float32 {
	fi, fj, f := fg.fine.IJK(n)
	st := &fg.slices[f]
	c := fg.coarseIndex(fi, fj)
	if !st.valid || c < 0 {
		return 0
	}
	cs := fg.coarse.SliceLen()
	var s float32
	for a := 0; a < 2; a++ {
		if st.lw[a] != 0 {
			if x := v[st.lk[a]*cs+c]; x == x {
				s += st.lw[a] * x
			}
		}
	}
	return s
}

// logAt returns the interpolated log-dose at fine voxel n of coarse
// log-dose lv (no NaN), with the cubic stencil of interpLog.
func (fg *fineGrid) logAt(lv []float32, n int) float32 {
	fi, fj, f := fg.fine.IJK(n)
	st := &fg.slices[f]
	c := fg.coarseIndex(fi, fj)
	if !st.valid || c < 0 {
		return float32(math.Inf(-1))
	}
	cs := fg.coarse.SliceLen()
	var s float32
	for a := 0; a < 4; a++ {
		if st.w[a] != 0 {
			s += st.w[a] * lv[st.k[a]*cs+c]
		}
	}
	return s
}

// coarseSlice returns the 0-based thermometry slice nearest fine slice f,
// or -1 when f lies outside the thermometry slices.
func (fg *fineGrid) coarseSlice(f int) int {
	if !fg.slices[f].valid {
		return -1
	}
	return fg.slices[f].nearest
}

func logDose(d float32) float32 {
	if d != d || d < logFloor {
		d = logFloor
	}
	return float32(math.Log(float64(d)))
}

// markLinearTaps sets mark at the coarse voxels logAtLinear reads for fine
// voxel n and returns mark.
func (fg *fineGrid) markLinearTaps(n int, mark []bool) []bool {
	fi, fj, f := fg.fine.IJK(n)
	st := &fg.slices[f]
	c := fg.coarseIndex(fi, fj)
	if !st.valid || c < 0 {
		return mark
	}
	cs := fg.coarse.SliceLen()
	for a := 0; a < 4; a++ {
		if st.w[a] != 0 {
			mark[st.k[a]*cs+c] = true
		}
	}
	return mark
}

// logAtLinear is logAt for a coarse linear-domain dose field v without NaN
// (the logarithms of the four taps are taken here, for fields of which few
// voxels are needed).
func (fg *fineGrid) logAtLinear(v []float32, n int) float32 {
	fi, fj, f := fg.fine.IJK(n)
	st := &fg.slices[f]
	c := fg.coarseIndex(fi, fj)
	if !st.valid || c < 0 {
		return logDose(0)
	}
	cs := fg.coarse.SliceLen()
	var s float32
	for a := 0; a < 4; a++ {
		if st.w[a] != 0 {
			s += st.w[a] * logDose(v[st.k[a]*cs+c])
		}
	}
	return s
}

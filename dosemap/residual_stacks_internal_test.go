package dosemap

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestResidualStacksMaskedVisit: EstimateResidual visiting only the
// voxels of each tail's mask (addStacksTo) gives, bit for bit, the
// estimate of visiting every voxel (addStacksToAll, the straightforward
// form) on a session of sonications measured on a coronal and a sagittal
// plane each, the planes moving with the focus by fractions of a voxel,
// one sonication on its coronal plane alone, masks that are boxes and one
// that is not a box, and noisy cooling spots. Reference: the
// straightforward form itself; tolerance: none (identical bits, NaN where
// NaN).
func TestResidualStacksMaskedVisit(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	plane := func(row, origin Vec3) Geometry {
		col := Vec3{0, 0, -1}
		return Geometry{Cols: 48, Rows: 40, Slices: 1, Spacing: Vec3{1.25, 1.25, 3},
			Row: row, Col: col, Normal: row.Cross(col), Origin: origin}
	}
	tail := func(g Geometry, t0 float64, c Vec3, mask []bool) *CoolingTail {
		tl := &CoolingTail{Geometry: g, Baseline: []float64{t0 - 6, t0 - 3}, Times: []float64{t0 + 20, t0 + 23, t0 + 26}, Mask: mask}
		for f, tt := range tl.Times {
			fr := make([]float32, g.Len())
			for v := range fr {
				i, j, k := g.IJK(v)
				d := g.Point(float64(i), float64(j), float64(k)).Sub(c)
				s := 9 + 2*0.147*float64(f)*3
				fr[v] = float32(15*math.Pow(9/s, 1.5)*math.Exp(-d.Dot(d)/(2*s))*math.Exp(-tt/2000) + 0.3*rng.NormFloat64())
			}
			tl.Rise = append(tl.Rise, fr)
		}
		return tl
	}
	box := func(g Geometry, round bool) []bool {
		m := make([]bool, g.Len())
		for v := range m {
			i, j, _ := g.IJK(v)
			di, dj := float64(i-g.Cols/2), float64(j-g.Rows/2)
			m[v] = math.Abs(di) < 14 && math.Abs(dj) < 11
			if round {
				m[v] = di*di+dj*dj < 120 && i%7 != 3 // a mask with gaps in its rows
			}
		}
		return m
	}
	var tails []*CoolingTail
	for n := 0; n < 9; n++ {
		m := n
		if n == 7 {
			m = 2 // the planes of sonication 3 again: the same grids
		}
		c := Vec3{-4 + 1.1*float64(m%4), 0, 18 + 0.7*float64(m/4)}
		t0 := 40 * float64(n)
		cor := plane(Vec3{1, 0, 0}, c.Sub(Vec3{24 * 1.25, 0, -20 * 1.25}))
		sag := plane(Vec3{0, 1, 0}, c.Sub(Vec3{0, 24 * 1.25, -20 * 1.25}))
		tl := tail(cor, t0, c, box(cor, n == 5))
		if n != 3 {
			tl.Stacks = []*CoolingTail{tail(sag, t0, c, box(sag, n == 6))}
		}
		tails = append(tails, tl)
	}
	opt := DefaultResidualOptions()
	fast, err := estimateResidual(tails, opt, false)
	if err != nil {
		t.Fatal(err)
	}
	slow, err := estimateResidual(tails, opt, true)
	if err != nil {
		t.Fatal(err)
	}
	known := 0
	for n := range fast {
		a := append([]*Volume{fast[n].Rise}, fast[n].Stacks...)
		b := append([]*Volume{slow[n].Rise}, slow[n].Stacks...)
		if len(a) != len(b) {
			t.Fatalf("sonication %d: %d stacks, straightforward %d", n+1, len(a), len(b))
		}
		for s := range a {
			for v := range a[s].Data {
				x, y := a[s].Data[v], b[s].Data[v]
				if math.Float32bits(x) != math.Float32bits(y) && !(x != x && y != y) {
					t.Fatalf("sonication %d stack %d voxel %d: %v, straightforward %v", n+1, s+1, v, x, y)
				}
				if x == x && x > 0 {
					known++
				}
			}
		}
	}
	if known == 0 {
		t.Fatal("no positive estimate anywhere: the comparison checks nothing")
	}
}

// TestSmoothInPlaneDefinition checks smoothInPlane against its definition
// written out plainly (the mean of the finite values among the 3×3
// in-plane neighbours inside the grid, summed in row-major order; NaN
// where the voxel is NaN or outside the mask), bit for bit, on seeded
// random grids with NaNs, with and without a mask, including grids one
// row or one column wide.
func TestSmoothInPlaneDefinition(t *testing.T) {
	def := func(g Geometry, x []float32, mask []bool) []float32 {
		out := make([]float32, len(x))
		for k := 0; k < g.Slices; k++ {
			for j := 0; j < g.Rows; j++ {
				for i := 0; i < g.Cols; i++ {
					n := g.Index(i, j, k)
					if mask != nil && !mask[n] || x[n] != x[n] {
						out[n] = float32(math.NaN())
						continue
					}
					var s float32
					c := 0
					for dj := j - 1; dj <= j+1; dj++ {
						for di := i - 1; di <= i+1; di++ {
							if di < 0 || dj < 0 || di >= g.Cols || dj >= g.Rows {
								continue
							}
							if y := x[g.Index(di, dj, k)]; !math.IsNaN(float64(y)) {
								s += y
								c++
							}
						}
					}
					out[n] = s / float32(c)
				}
			}
		}
		return out
	}
	rng := rand.New(rand.NewPCG(31, 32))
	for _, dims := range [][3]int{{1, 1, 1}, {1, 7, 2}, {7, 1, 2}, {2, 2, 1}, {9, 6, 3}, {32, 17, 2}} {
		g := Geometry{Cols: dims[0], Rows: dims[1], Slices: dims[2], Spacing: Vec3{1, 1, 2}, Row: Vec3{1, 0, 0}, Col: Vec3{0, 1, 0}}
		x := make([]float32, g.Len())
		mask := make([]bool, g.Len())
		for n := range x {
			x[n] = float32(rng.NormFloat64() * 5)
			if rng.IntN(6) == 0 {
				x[n] = float32(math.NaN())
			}
			mask[n] = rng.IntN(4) != 0
		}
		for _, m := range [][]bool{nil, mask} {
			got, want := smoothInPlane(g, x, m), def(g, x, m)
			for n := range want {
				if math.Float32bits(got[n]) != math.Float32bits(want[n]) && !(got[n] != got[n] && want[n] != want[n]) {
					t.Fatalf("grid %v, mask %v, voxel %d: %v, want %v", dims, m != nil, n, got[n], want[n])
				}
			}
		}
	}
}

// TestAddToIndexedVisit checks that addTo on the fit's own grid, visiting
// only the fit's unknown runs and heated voxels (coolingFit.indexVoxels),
// leaves rise and corr bit for bit as addTo's definition written out over
// every voxel does (NaN where a is unknown, a·h(τ) at the baseline added
// to rise and a·h(τ, t) − a·h(τ) to each frame's change), on a noisy
// cooling spot with a box mask, voxels with too few valid frames and
// buffers already holding values (the heat of earlier fits).
func TestAddToIndexedVisit(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	g := Geometry{Cols: 24, Rows: 20, Slices: 3, Spacing: Vec3{1.5, 1.5, 3}, Row: Vec3{1, 0, 0}, Col: Vec3{0, 1, 0}}
	nv := g.Len()
	times := []float64{40, 43, 46}
	tail := make([][]float32, len(times))
	mask := make([]bool, nv)
	for f := range tail {
		tail[f] = make([]float32, nv)
	}
	for n := range nv {
		i, j, k := g.IJK(n)
		mask[n] = i >= 3 && i < 20 && j >= 2 && j < 17
		r2 := float64((i-11)*(i-11) + (j-9)*(j-9) + 4*(k-1)*(k-1))
		for f, tm := range times {
			tail[f][n] = float32(12*math.Exp(-r2/18)*math.Pow(1+(tm-40)/60, -1.5) + rng.NormFloat64()*0.3)
			if rng.IntN(12) == 0 {
				tail[f][n] = float32(math.NaN())
			}
		}
	}
	fit := fitCooling(g, times, tail, mask, DefaultResidualOptions().withDefaults())
	if len(fit.heated) == 0 || len(fit.unknown) == 0 {
		t.Fatalf("fit with %d heated voxels and %d unknown runs: the case does not exercise the visit", len(fit.heated), len(fit.unknown))
	}
	tl := &CoolingTail{Geometry: g, Baseline: []float64{90, 93}, Times: []float64{130, 133, 136}}
	fill := func() ([]float32, [][]float32) {
		r := rand.New(rand.NewPCG(43, 44))
		rise := make([]float32, nv)
		corr := make([][]float32, len(tl.Times))
		for n := range rise {
			rise[n] = float32(r.Float64())
		}
		for f := range corr {
			corr[f] = make([]float32, nv)
			for n := range corr[f] {
				corr[f][n] = float32(r.Float64())
			}
		}
		return rise, corr
	}
	riseI, corrI := fill()
	fit.addTo(g, tl, riseI, corrI, mask, nil, nil)
	riseA, corrA := fill()
	tb := fit.meanTable(tl.Baseline)
	for v, a := range fit.amp {
		switch {
		case math.IsNaN(float64(a)):
			riseA[v] = float32(math.NaN())
		case a != 0:
			ti := fit.tau[v]
			b := a * tb[ti]
			riseA[v] += b
			for fr, tm := range tl.Times {
				corrA[fr][v] += a*fit.table(tm)[ti] - b
			}
		}
	}
	same := func(a, b float32) bool { return math.Float32bits(a) == math.Float32bits(b) || a != a && b != b }
	for n := range riseA {
		if !same(riseI[n], riseA[n]) {
			t.Fatalf("voxel %d: rise %v visiting the index, %v visiting every voxel", n, riseI[n], riseA[n])
		}
		for f := range corrA {
			if !same(corrI[f][n], corrA[f][n]) {
				t.Fatalf("voxel %d frame %d: change %v visiting the index, %v visiting every voxel", n, f, corrI[f][n], corrA[f][n])
			}
		}
	}
}

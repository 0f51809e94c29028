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

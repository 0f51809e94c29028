package dosemap_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"dosecover/dosemap"
)

// gaussKernel is the rise of a Gaussian spot of variance sig2 (mm²) at
// time 0 centred on c, t seconds later, in a medium of diffusivity alpha
// (mm²/s) with perfusion rate w (1/s): the heat kernel of the heat
// equation (Carslaw & Jaeger, Conduction of Heat in Solids, 1959, from
// memory) times the Pennes perfusion decay e^{−wt} (Pennes 1948).
func gaussKernel(a, sig2, alpha, w float64, c, p dosemap.Vec3, t float64) float64 {
	s := sig2 + 2*alpha*t
	r := p.Sub(c)
	return a * math.Pow(sig2/s, 1.5) * math.Exp(-r.Dot(r)/(2*s)) * math.Exp(-w*t)
}

// spotTail returns a CoolingTail on g whose frames at times (s) hold the
// sum of the kernels of spots (centre, time origin), minus their mean
// over the baseline times (as PRF thermometry measures them).
func spotTail(g dosemap.Geometry, baseline, times []float64, spots []spot, alpha, w float64) *dosemap.CoolingTail {
	t := &dosemap.CoolingTail{Geometry: g, Baseline: baseline, Times: times}
	at := func(p dosemap.Vec3, tt float64) float64 {
		var u float64
		for _, s := range spots {
			if tt >= s.t0 {
				u += gaussKernel(s.a, s.sig2, alpha, w, s.c, p, tt-s.t0)
			}
		}
		return u
	}
	for _, tt := range times {
		fr := make([]float32, g.Len())
		for n := range fr {
			i, j, k := g.IJK(n)
			p := g.Point(float64(i), float64(j), float64(k))
			var b float64
			for _, tb := range baseline {
				b += at(p, tb) / float64(len(baseline))
			}
			fr[n] = float32(at(p, tt) - b)
		}
		t.Rise = append(t.Rise, fr)
	}
	return t
}

type spot struct {
	a, sig2 float64
	c       dosemap.Vec3
	t0      float64
}

// TestResidualHeatKernel checks EstimateResidual against the closed-form
// cooling of Gaussian spots (the heat kernel, with Pennes' perfusion
// term): the tails of one or two earlier spots, each measured from its
// own baseline, extrapolated to a later baseline. Diffusivity 0.147 mm²/s
// (tissue-mimicking gel: k 0.58 W/m/K, ρc 3.95 MJ/m³/K, Zell et al. 2007,
// from memory), spot variance 9 mm², 1 mm voxels, frames every 3 s.
// Tolerance 15 % of the spots' centre value at that time or 0.1 °C: the
// τ set is spaced by 10 %, the spot's τ is fitted on its hottest voxels
// as if they were all at the centre (slightly too slow), and the tail
// frames are averaged over 3×3 in-plane voxels (the estimate's noise
// filter), which mixes the shapes of neighbouring voxels (worst found: 14
// % of the centre value, 7.5 mm off the centre after 60 s).
func TestResidualHeatKernel(t *testing.T) {
	const alpha = 0.147
	g := dosemap.NewAxialGeometry(41, 41, 9, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{-20, -20, -4})
	c1 := dosemap.Vec3{0, 0, 0}
	c2 := dosemap.Vec3{5, 0, 0}
	for _, tc := range []struct {
		name  string
		w     float64 // perfusion rate, 1/s
		gap   float64 // s from the last tail frame to the next baseline
		spots []spot
	}{
		{"one spot, 13 s", 0, 13, []spot{{20, 9, c1, 0}}},
		{"one spot, 60 s", 0, 60, []spot{{20, 9, c1, 0}}},
		{"one spot, perfused, 60 s", 5.8e-4 * 20, 60, []spot{{20, 9, c1, 0}}},
		{"two spots, 13 s", 0, 13, []spot{{20, 9, c1, 0}, {20, 9, c2, 34}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var tails []*dosemap.CoolingTail
			var want func(p dosemap.Vec3, tb []float64) float64
			start := 0.0
			for n, s := range tc.spots {
				// Baseline frames at s.t0-6 and s.t0-3, tail frames at
				// s.t0, +3, +6: the spot's heating is over at s.t0.
				base := []float64{s.t0 - 6, s.t0 - 3}
				tails = append(tails, spotTail(g, base, []float64{s.t0, s.t0 + 3, s.t0 + 6}, tc.spots[:n+1], alpha, tc.w))
				start = s.t0 + 6
			}
			tb := []float64{start + tc.gap, start + tc.gap + 3}
			last := &dosemap.CoolingTail{Geometry: g, Baseline: tb, Times: []float64{tb[1] + 3, tb[1] + 6}}
			for range last.Times {
				last.Rise = append(last.Rise, make([]float32, g.Len()))
			}
			tails = append(tails, last)
			want = func(p dosemap.Vec3, tb []float64) float64 {
				var u float64
				for _, s := range tc.spots {
					for _, x := range tb {
						u += gaussKernel(s.a, s.sig2, alpha, tc.w, s.c, p, x-s.t0) / float64(len(tb))
					}
				}
				return u
			}
			opt := dosemap.DefaultResidualOptions()
			opt.PerfusionRate = tc.w
			est, err := dosemap.EstimateResidual(tails, opt)
			if err != nil {
				t.Fatal(err)
			}
			r := est[len(est)-1].Rise
			if r == nil || math.Abs(est[len(est)-1].CoolingS-tc.gap) > 1e-9 {
				t.Fatalf("estimate %v, cooling %g s (want %g)", r, est[len(est)-1].CoolingS, tc.gap)
			}
			centre := want(c1, tb)
			for _, p := range []dosemap.Vec3{c1, {3, 0, 0}, {0, 6, 0}, {0, 0, 3}, {9, 0, 0}, c2, {-6, 4, 2}} {
				i, j, k := g.Voxel(p)
				got := float64(r.At(int(math.Round(i)), int(math.Round(j)), int(math.Round(k))))
				w := want(p, tb)
				if math.Abs(got-w) > math.Max(0.15*centre, 0.1) {
					t.Errorf("at %v: estimated %.3f °C, heat kernel %.3f °C (centre %.3f)", p, got, w, centre)
				}
			}
		})
	}
}

// TestResidualUnknown: a voxel an earlier sonication did not measure is
// unknown at every later baseline (NaN, not zero), and a sonication
// without a tail makes every later estimate unknown.
func TestResidualUnknown(t *testing.T) {
	g := dosemap.NewAxialGeometry(5, 5, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	mk := func(t0 float64) *dosemap.CoolingTail {
		tl := &dosemap.CoolingTail{Geometry: g, Baseline: []float64{t0}, Times: []float64{t0 + 3, t0 + 6}}
		for f := range tl.Times {
			fr := make([]float32, g.Len())
			for n := range fr {
				fr[n] = float32(5 - f)
			}
			tl.Rise = append(tl.Rise, fr)
		}
		return tl
	}
	first := mk(0)
	hole := g.Index(2, 2, 0)
	for _, fr := range first.Rise {
		fr[hole] = float32(math.NaN())
	}
	est, err := dosemap.EstimateResidual([]*dosemap.CoolingTail{first, mk(20), nil, mk(60)}, dosemap.ResidualOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for n, x := range est[0].Rise.Data {
		if x != 0 {
			t.Fatalf("first sonication: residual %g at voxel %d, want 0", x, n)
		}
	}
	r := est[1].Rise.Data
	if !math.IsNaN(float64(r[hole])) {
		t.Errorf("voxel the first sonication did not measure: %g, want NaN", r[hole])
	}
	if x := r[g.Index(0, 0, 0)]; !(x > 0) {
		t.Errorf("measured voxel: %g, want a positive rise", x)
	}
	if est[2].Rise != nil {
		t.Errorf("sonication without a tail has an estimate")
	}
	for n, x := range est[3].Rise.Data {
		if !math.IsNaN(float64(x)) {
			t.Fatalf("after a sonication without a tail: %g at voxel %d, want NaN", x, n)
		}
	}
	if !math.IsNaN(est[0].CoolingS) || est[1].CoolingS != 14 {
		t.Errorf("cooling %g, %g s; want NaN and 14", est[0].CoolingS, est[1].CoolingS)
	}
	bad := mk(0)
	bad.Times = bad.Times[:1]
	if _, err := dosemap.EstimateResidual([]*dosemap.CoolingTail{bad}, dosemap.ResidualOptions{}); err == nil {
		t.Error("a tail with more frames than times was accepted")
	}
}

// BenchmarkEstimateResidual times the residual heat estimate of 24
// sonications with 3 tail frames each on grids of 64×64×4, 128×128×6 and
// 256×256×6 voxels (seeded noise of 0.5 °C on a Gaussian spot), limited
// to the central half of each row and column (a quarter of the voxels, as
// an analysis limits it to the target and its margins).
func BenchmarkEstimateResidual(b *testing.B) {
	for _, sz := range [][3]int{{64, 64, 4}, {128, 128, 6}, {256, 256, 6}} {
		g := dosemap.NewAxialGeometry(sz[0], sz[1], sz[2], dosemap.Vec3{1.25, 1.25, 3}, dosemap.Vec3{})
		rng := rand.New(rand.NewPCG(1, 2))
		mask := make([]bool, g.Len())
		for n := range mask {
			i, j, _ := g.IJK(n)
			mask[n] = i >= sz[0]/4 && i < 3*sz[0]/4 && j >= sz[1]/4 && j < 3*sz[1]/4
		}
		var tails []*dosemap.CoolingTail
		for n := 0; n < 24; n++ {
			t0 := float64(n) * 45
			c := g.Point(float64(sz[0]/2+n%6), float64(sz[1]/2), float64(sz[2]/2))
			tl := spotTail(g, []float64{t0 - 6, t0 - 3}, []float64{t0, t0 + 3, t0 + 6}, []spot{{20, 9, c, t0}}, 0.147, 0)
			for _, fr := range tl.Rise {
				for v := range fr {
					fr[v] += float32(0.5 * rng.NormFloat64())
				}
			}
			tl.Mask = mask
			tails = append(tails, tl)
		}
		b.Run(fmt.Sprintf("%dx%dx%d", sz[0], sz[1], sz[2]), func(b *testing.B) {
			for range b.N {
				if _, err := dosemap.EstimateResidual(tails, dosemap.DefaultResidualOptions()); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// TestResidualStacks: a spot measured on a coronal and a sagittal plane
// through its centre (two stacks of one sonication), then a sonication
// measured on the same coronal plane and on a sagittal plane 3 mm away.
// Against the heat kernel as in TestResidualHeatKernel (same tolerance:
// 15 % of the centre value or 0.1 °C), 13 s after the spot's last frame:
// the later coronal plane's estimate is known over the spot; the later
// sagittal plane's is known where an earlier plane measured it (its line
// through the coronal plane) and matches there, and is unknown (NaN)
// where neither earlier plane measured it.
func TestResidualStacks(t *testing.T) {
	const alpha = 0.147
	plane := func(row dosemap.Vec3, origin dosemap.Vec3) dosemap.Geometry {
		col := dosemap.Vec3{0, 0, -1}
		return dosemap.Geometry{Cols: 41, Rows: 41, Slices: 1, Spacing: dosemap.Vec3{1, 1, 1},
			Row: row, Col: col, Normal: row.Cross(col), Origin: origin}
	}
	cor := plane(dosemap.Vec3{1, 0, 0}, dosemap.Vec3{-20, 0, 20})
	sag := func(x float64) dosemap.Geometry { return plane(dosemap.Vec3{0, 1, 0}, dosemap.Vec3{x, -20, 20}) }
	sp := []spot{{20, 9, dosemap.Vec3{}, 0}}
	base, times := []float64{-6, -3}, []float64{0, 3, 6}
	first := spotTail(cor, base, times, sp, alpha, 0)
	first.Stacks = []*dosemap.CoolingTail{spotTail(sag(0), base, times, sp, alpha, 0)}
	tb := []float64{19, 22}
	empty := func(g dosemap.Geometry) *dosemap.CoolingTail {
		tl := &dosemap.CoolingTail{Geometry: g, Baseline: tb, Times: []float64{25, 28}}
		for range tl.Times {
			tl.Rise = append(tl.Rise, make([]float32, g.Len()))
		}
		return tl
	}
	last := empty(cor)
	last.Stacks = []*dosemap.CoolingTail{empty(sag(3))}
	est, err := dosemap.EstimateResidual([]*dosemap.CoolingTail{first, last}, dosemap.DefaultResidualOptions())
	if err != nil {
		t.Fatal(err)
	}
	e := est[1]
	if e.Rise == nil || len(e.Stacks) != 1 || len(est[0].Stacks) != 1 {
		t.Fatalf("estimate %v with %d stacks; the first %d", e.Rise, len(e.Stacks), len(est[0].Stacks))
	}
	want := func(p dosemap.Vec3) float64 {
		var u float64
		for _, x := range tb {
			u += gaussKernel(20, 9, alpha, 0, dosemap.Vec3{}, p, x) / float64(len(tb))
		}
		return u
	}
	centre := want(dosemap.Vec3{})
	check := func(v *dosemap.Volume, p dosemap.Vec3, known bool) {
		i, j, k := v.Voxel(p)
		got := float64(v.At(int(math.Round(i)), int(math.Round(j)), int(math.Round(k))))
		switch {
		case !known && got == got:
			t.Errorf("at %v: estimated %.3f °C where no earlier stack measured; want unknown", p, got)
		case known && !(math.Abs(got-want(p)) <= math.Max(0.15*centre, 0.1)):
			t.Errorf("at %v: estimated %.3f °C, heat kernel %.3f °C (centre %.3f)", p, got, want(p), centre)
		}
	}
	for _, p := range []dosemap.Vec3{{0, 0, 0}, {3, 0, 0}, {0, 0, 4}, {-6, 0, 2}} {
		check(e.Rise, p, true)
	}
	for _, p := range []dosemap.Vec3{{3, 0, 0}, {3, 0, 4}, {3, 0, -3}} {
		check(e.Stacks[0], p, true)
	}
	for _, p := range []dosemap.Vec3{{3, 6, 0}, {3, -5, 2}} {
		check(e.Stacks[0], p, false)
	}
}

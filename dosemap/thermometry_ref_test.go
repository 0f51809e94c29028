package dosemap

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// referenceThermometry is a plain, voxel-by-voxel float64 rendering of the
// steps documented on Thermometry for polynomial drift of order 1 with an
// explicit reference mask: complex-mean baseline, Itoh temporal unwrapping
// (Itoh, Appl Opt 1982;21:2470), motion check by Pearson r over every other
// voxel, per-slice weighted least squares of 1, x, y (weights baseline
// magnitude squared) solved with gonum's dense solver, T = BodyTemp + Δφ/ppd.
func referenceThermometry(s *Sonication, opt ThermometryOptions) [][]float64 {
	opt = opt.withDefaults()
	g := s.Geometry
	nv, nf, nb := g.Len(), len(s.Phase), min(opt.BaselineFrames, len(s.Phase))
	baseMag := make([]float64, nv)
	for n := range baseMag {
		for f := 0; f < nb; f++ {
			baseMag[n] += float64(s.Magnitude[f][n]) / float64(nb)
		}
	}
	sorted := slices.Clone(baseMag)
	slices.Sort(sorted)
	thr := opt.MinMagnitude * sorted[min(nv-1, int(0.98*float64(nv)))]
	refPhase := make([]float64, nv)
	for n := range refPhase {
		var z complex128
		for f := 0; f < nb; f++ {
			z += cmplx.Rect(float64(s.Magnitude[f][n]), float64(s.Phase[f][n]))
		}
		refPhase[n] = math.NaN()
		if baseMag[n] >= float64(float32(thr)) && z != 0 {
			refPhase[n] = cmplx.Phase(z)
		}
	}
	out := make([][]float64, nf)
	last := make([]float64, nv)
	for f := range out {
		fr := make([]float64, nv)
		out[f] = fr
		// Pearson r, two-pass.
		var ma, mb float64
		cnt := 0
		for n := 0; n < nv; n += 2 {
			ma += float64(s.Magnitude[f][n])
			mb += baseMag[n]
			cnt++
		}
		ma, mb = ma/float64(cnt), mb/float64(cnt)
		var sab, saa, sbb float64
		for n := 0; n < nv; n += 2 {
			da, db := float64(s.Magnitude[f][n])-ma, baseMag[n]-mb
			sab += da * db
			saa += da * da
			sbb += db * db
		}
		if 1-sab/math.Sqrt(saa*sbb) > opt.MaxMotion {
			for n := range fr {
				fr[n] = math.NaN()
			}
			continue
		}
		for n := range fr {
			v := float64(s.Phase[f][n])
			if math.IsNaN(v) || math.IsNaN(refPhase[n]) || float64(s.Magnitude[f][n]) < float64(float32(thr)) {
				fr[n] = math.NaN()
				continue
			}
			d := math.Remainder(v-refPhase[n], 2*math.Pi)
			u := d + 2*math.Pi*math.Round((last[n]-d)/(2*math.Pi))
			last[n], fr[n] = u, u
		}
		sl := g.SliceLen()
		norm := func(i, n int) float64 { return (float64(i) - float64(n-1)/2) / (float64(n-1) / 2) }
		for k := 0; k < g.Slices; k++ {
			ata := mat.NewDense(3, 3, nil)
			atv := mat.NewVecDense(3, nil)
			for n := k * sl; n < (k+1)*sl; n++ {
				if !opt.Reference[n] || math.IsNaN(fr[n]) || math.IsNaN(refPhase[n]) {
					continue
				}
				i, j, _ := g.IJK(n)
				b := []float64{1, norm(i, g.Cols), norm(j, g.Rows)}
				w := baseMag[n] * baseMag[n]
				for r := 0; r < 3; r++ {
					atv.SetVec(r, atv.AtVec(r)+w*b[r]*fr[n])
					for c := 0; c < 3; c++ {
						ata.Set(r, c, ata.At(r, c)+w*b[r]*b[c])
					}
				}
			}
			var c mat.VecDense
			if err := c.SolveVec(ata, atv); err != nil {
				panic(err)
			}
			for n := k * sl; n < (k+1)*sl; n++ {
				i, j, _ := g.IJK(n)
				fr[n] -= c.AtVec(0) + c.AtVec(1)*norm(i, g.Cols) + c.AtVec(2)*norm(j, g.Rows)
			}
		}
		ppd := opt.PRF.PhasePerDegree()
		if opt.PRF.B0 == 0 {
			p := opt.PRF
			p.B0, p.TE = s.B0, s.TE
			ppd = p.PhasePerDegree()
		}
		for n := range fr {
			fr[n] = opt.BodyTemp + fr[n]/ppd
		}
	}
	return out
}

// TestThermometryMatchesReference compares Thermometry with the plain
// implementation above on a seeded noisy series with a 45 °C rise that
// wraps the phase, a linear drift, dropped voxels and a frame of motion.
// Tolerance 1e-4 °C: float32 phases and outputs (a float32 rounding of a
// phase change of 20 rad is 1e-6 rad, about 1e-5 °C at 3 T, TE 12.8 ms)
// with head room; the NaN pattern must be identical.
func TestThermometryMatchesReference(t *testing.T) {
	p := newPhantom(32, 14)
	p.rise = hotSpot(45, 2, 8)
	p.drift = func(x, y float64, f int) float64 { return float64(f) * (0.04 + 0.003*x - 0.002*y) }
	p.snr = 40
	p.seed = 7
	s := p.sonication(true)
	rng := rand.New(rand.NewPCG(3, 4))
	for f := 2; f < len(s.Phase); f++ { // the baseline stays intact
		for range 20 {
			n := rng.IntN(len(s.Phase[f]))
			if rng.IntN(2) == 0 {
				s.Magnitude[f][n] = 0.5 // below the signal threshold
			} else {
				s.Phase[f][n] = float32(math.NaN())
			}
		}
	}
	// Frame 9: the object moves by 6 voxels.
	mv := s.Magnitude[9]
	copy(mv, append(mv[6:], mv[:6]...))
	opt := DefaultThermometryOptions()
	opt.Reference = make([]bool, p.g.Len())
	for n := range opt.Reference {
		pt := voxelPoint(p.g, n)
		opt.Reference[n] = math.Hypot(pt[0], pt[1]) > 20
	}
	ts, err := Thermometry(s, opt)
	if err != nil {
		t.Fatal(err)
	}
	want := referenceThermometry(s, opt)
	const tol = 1e-4
	worst, valid := 0.0, 0
	for f := range want {
		for n, w := range want[f] {
			got := float64(ts.Frames[f][n])
			if math.IsNaN(got) != math.IsNaN(w) {
				t.Fatalf("frame %d voxel %d: got %v, reference %v", f, n, got, w)
			}
			if !math.IsNaN(w) {
				valid++
				worst = max(worst, math.Abs(got-w))
			}
		}
	}
	if !ts.Quality[9].Flagged {
		t.Errorf("frame 10 (moved) not flagged: %+v", ts.Quality[9])
	}
	if valid < len(want)*p.g.Len()/3 {
		t.Fatalf("only %d valid voxel-frames compared", valid)
	}
	if worst > tol {
		t.Errorf("largest difference from the reference %.2g °C, tolerance %g", worst, tol)
	}
	t.Logf("%d voxel-frames, largest difference %.2g °C", valid, worst)
}

// TestMotionCheckMatchesPearson compares the centred-baseline correlation
// with the direct sums of correlation (the textbook Pearson formula) on
// seeded random images; tolerance 1e-6 in r (the centred baseline is
// float32, relative rounding 2⁻²⁴ ≈ 6e-8 per value; the motion threshold is
// r < 0.9, so 1e-6 changes no decision but on a knife edge).
func TestMotionCheckMatchesPearson(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, c := range []struct {
		name    string
		n       int
		nanA    bool
		nanBase bool
	}{{"plain", 5000, false, false}, {"NaN in frame", 5000, true, false}, {"NaN in baseline", 5000, false, true}, {"odd length", 4999, false, false}} {
		a, b := make([]float32, c.n), make([]float32, c.n)
		for i := range a {
			b[i] = float32(100 + 20*rng.NormFloat64())
			a[i] = b[i] + float32(10*rng.NormFloat64())
		}
		if c.nanA {
			a[10] = float32(math.NaN())
		}
		if c.nanBase {
			b[20] = float32(math.NaN())
		}
		mc := newMotionCheck(b, 2)
		got, want := mc.correlation(a), correlation(a, b, 2)
		if !(math.Abs(got-want) <= 1e-6) || !(want > 0.5) {
			t.Errorf("%s: r = %v, direct sums %v", c.name, got, want)
		}
	}
}

// TestSincosSmall checks the series against math.Sincos (the standard
// library's, accurate to an ulp) across and beyond the series range;
// tolerance 1e-11 (truncation bound 7e-12 at π/4).
func TestSincosSmall(t *testing.T) {
	for x := -4.0; x <= 4; x += 1.0 / 1024 {
		s, c := sincosSmall(x)
		ws, wc := math.Sincos(x)
		if math.Abs(s-ws) > 1e-11 || math.Abs(c-wc) > 1e-11 {
			t.Fatalf("sincosSmall(%v) = %v, %v; math.Sincos %v, %v", x, s, c, ws, wc)
		}
	}
}

// TestAtan2Small checks the series against math.Atan2 (the standard
// library's) inside and outside its range of use, signed zero included;
// tolerance 1e-13 (truncation bound 8e-15).
func TestAtan2Small(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 9))
	for i := 0; i < 20000; i++ {
		x, y := 4*rng.Float64()-2, 0.5*rng.Float64()-0.25
		if i%4 == 0 {
			x, y = 4*rng.Float64()-2, 4*rng.Float64()-2
		}
		if got, want := atan2Small(y, x), math.Atan2(y, x); math.Abs(got-want) > 1e-13 {
			t.Fatalf("atan2Small(%v, %v) = %v, math.Atan2 %v", y, x, got, want)
		}
	}
	if got := atan2Small(0, 1); got != 0 {
		t.Errorf("atan2Small(0, 1) = %v", got)
	}
}

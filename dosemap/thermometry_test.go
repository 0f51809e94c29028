package dosemap

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

func TestPRFCheckValues(t *testing.T) {
	// testdata/check-values.md, computed from Δφ/ΔT = γ·α·B0·TE with γ/2π =
	// 42.57747892 MHz/T (CODATA 2014) and α = −0.01 ppm/°C; tolerances are
	// half a unit of the listed last digit. σ_T = √2/(|γαB0TE|·SNR) (the √2
	// from memory).
	cases := []struct {
		name      string
		p         PRF
		perDegree float64 // |rad/°C|, 0 = not listed
		wrap      float64 // °C
		snr       float64
		sigma     float64 // °C
	}{
		{"3 T TE 12.8 ms", PRF{Alpha: -0.01, B0: 3, TE: 12.8e-3}, 0.1027, 30.6, 50, 0.275},
		{"1.5 T TE 20 ms", PRF{Alpha: -0.01, B0: 1.5, TE: 20e-3}, 0, 39.1, 0, 0},
	}
	for _, c := range cases {
		if c.perDegree != 0 {
			if got := math.Abs(c.p.PhasePerDegree()); math.Abs(got-c.perDegree) > 5e-5 {
				t.Errorf("%s: |dφ/dT| = %.5f rad/°C, want %.4f", c.name, got, c.perDegree)
			}
		}
		if got := c.p.WrapLimit(); math.Abs(got-c.wrap) > 0.05 {
			t.Errorf("%s: wrap limit %.3f °C, want %.1f", c.name, got, c.wrap)
		}
		if c.snr != 0 {
			if got := c.p.NoiseSigma(c.snr); math.Abs(got-c.sigma) > 5e-4 {
				t.Errorf("%s: σ_T = %.4f °C at SNR %g, want %.3f", c.name, got, c.snr, c.sigma)
			}
		}
	}
	// Sign and α: PRF frequency falls with temperature (α < 0), so with sign
	// +1 the phase falls; sign −1 flips it; a zero α means the default.
	p := PRF{B0: 3, TE: 0.01}
	if p.PhasePerDegree() >= 0 {
		t.Error("default α, sign +1: phase per degree should be negative")
	}
	q := p
	q.Sign = -1
	if q.PhasePerDegree() != -p.PhasePerDegree() {
		t.Error("sign −1 does not flip the phase per degree")
	}
	r := p
	r.Alpha = -0.0097 // porcine muscle, De Poorter MRM 1995;34:359
	if relErr(r.PhasePerDegree()/p.PhasePerDegree(), 0.97) > 1e-12 {
		t.Error("α is not proportional")
	}
}

func TestWrapPhase(t *testing.T) {
	// Definition: the result lies in (−π, π] and differs by a multiple of 2π.
	for _, x := range []float64{0, 1, math.Pi, -math.Pi, 3.5, -3.5, 7, -7, 100, -100, 2 * math.Pi, 1e-9 - math.Pi} {
		w := wrapPhase(x)
		if !(w > -math.Pi && w <= math.Pi) {
			t.Errorf("wrapPhase(%g) = %g outside (−π, π]", x, w)
		}
		if k := (x - w) / (2 * math.Pi); math.Abs(k-math.Round(k)) > 1e-9 {
			t.Errorf("wrapPhase(%g) = %g is not x − 2πk", x, w)
		}
	}
}

// phantom makes synthetic thermometry of a disc phantom: magnitude 100
// inside a disc, 1 outside; phase = a smooth offset + PhasePerDegree·ΔT +
// drift, wrapped into (−π, π]; optional complex Gaussian noise.
type phantom struct {
	g     Geometry
	prf   PRF
	times []float64
	rise  func(x, y float64, f int) float64 // ΔT °C at in-plane mm from the centre
	drift func(x, y float64, f int) float64 // background phase, rad
	snr   float64                           // 0: noiseless
	seed  uint64
}

func newPhantom(cols, frames int) *phantom {
	return &phantom{
		g:     NewAxialGeometry(cols, cols, 2, Vec3{2, 2, 3}, Vec3{-float64(cols - 1), -float64(cols - 1), 0}),
		prf:   PRF{Alpha: -0.01, B0: 3, TE: 12.8e-3, Sign: 1},
		times: uniformTimes(frames, 3),
		seed:  1,
	}
}

func (p *phantom) inside(x, y float64) bool {
	r := 0.9 * float64(p.g.Cols) // mm: 0.45 of the field of view
	return x*x+y*y < r*r
}

// truth returns ΔT of voxel n in frame f.
func (p *phantom) truth(n, f int) float64 {
	if p.rise == nil {
		return 0
	}
	pt := voxelPoint(p.g, n)
	return p.rise(pt[0], pt[1], f)
}

// voxelPoint returns the patient position of the centre of voxel n.
func voxelPoint(g Geometry, n int) Vec3 {
	i, j, k := g.IJK(n)
	return g.Point(float64(i), float64(j), float64(k))
}

func (p *phantom) sonication(withMag bool) *Sonication {
	rng := rand.New(rand.NewPCG(p.seed, 99))
	s := &Sonication{Number: 3, Label: "phantom", Geometry: p.g, Times: p.times, B0: p.prf.B0, TE: p.prf.TE}
	ppd := p.prf.PhasePerDegree()
	for f := range p.times {
		ph := make([]float32, p.g.Len())
		mg := make([]float32, p.g.Len())
		for n := range ph {
			pt := voxelPoint(p.g, n)
			m := 1.0
			if p.inside(pt[0], pt[1]) {
				m = 100
			}
			phi := 0.03*pt[0] - 0.02*pt[1] + 1.5*math.Sin(pt[1]/9) + 0.4*float64(pt[2])
			phi += ppd * p.truth(n, f)
			if p.drift != nil {
				phi += p.drift(pt[0], pt[1], f)
			}
			z := cmplx.Rect(m, phi)
			if p.snr > 0 {
				sd := 100 / p.snr
				z += complex(sd*rng.NormFloat64(), sd*rng.NormFloat64())
			}
			ph[n] = float32(wrapPhase(cmplx.Phase(z)))
			mg[n] = float32(cmplx.Abs(z))
		}
		s.Phase = append(s.Phase, ph)
		if withMag {
			s.Magnitude = append(s.Magnitude, mg)
		}
	}
	return s
}

// hotSpot is a Gaussian (σ 4 mm) rise to peak °C that ramps over frames
// [start, start+ramp) and then holds.
func hotSpot(peak float64, start, ramp int) func(x, y float64, f int) float64 {
	return func(x, y float64, f int) float64 {
		a := math.Min(1, math.Max(0, float64(f-start+1)/float64(ramp)))
		return peak * a * math.Exp(-(x*x+y*y)/(2*16))
	}
}

// maxErr returns the largest |T − (37 + truth)| over the voxels inside the
// phantom and whether any of them is NaN.
func maxErr(p *phantom, ts *TemperatureSeries) (float64, bool) {
	worst, nan := 0.0, false
	for f, fr := range ts.Frames {
		for n, v := range fr {
			pt := voxelPoint(p.g, n)
			if !p.inside(pt[0], pt[1]) {
				continue
			}
			if v != v {
				nan = true
				continue
			}
			worst = math.Max(worst, math.Abs(float64(v)-37-p.truth(n, f)))
		}
	}
	return worst, nan
}

func TestThermometryUnwrapsLargeRise(t *testing.T) {
	// A 45 °C rise at 3 T / TE 12.8 ms exceeds the 30.6 °C wrap limit
	// (testdata/check-values.md); it rises 3 °C per frame, well below it, so temporal
	// unwrapping must recover it. Noiseless: tolerance 1e-3 °C (float32 phase
	// ≈ 5e-7 rad ≈ 5e-6 °C).
	for _, withMag := range []bool{true, false} {
		p := newPhantom(32, 25)
		p.rise = hotSpot(45, 2, 15)
		opt := DefaultThermometryOptions()
		opt.Drift = DriftNone
		ts, err := Thermometry(p.sonication(withMag), opt)
		if err != nil {
			t.Fatal(err)
		}
		e, nan := maxErr(p, ts)
		if e > 1e-3 || nan {
			t.Errorf("magnitude %v: max error %g °C (NaN inside: %v)", withMag, e, nan)
		}
		peak := float32(0)
		for _, v := range ts.Frames[24] {
			if v == v {
				peak = max(peak, v)
			}
		}
		// The voxel centres nearest the centre lie √2 mm from it.
		if want := 37 + 45*math.Exp(-2.0/32); math.Abs(float64(peak)-want) > 1e-3 {
			t.Errorf("peak %g °C, want %g", peak, want)
		}
		wraps := 0
		for _, q := range ts.Quality {
			wraps += q.Wraps
		}
		if wraps == 0 {
			t.Error("no wraps counted for a rise beyond the wrap limit")
		}
		if withMag {
			for n, v := range ts.Frames[0] {
				pt := voxelPoint(p.g, n)
				if !p.inside(pt[0], pt[1]) && v == v {
					t.Fatalf("background voxel %d has temperature %g, want NaN", n, v)
				}
			}
		}
	}
}

func TestThermometrySignAndAlpha(t *testing.T) {
	// The data follow the scanner's sign and α; processing with the same
	// values recovers ΔT, with the opposite sign gives −ΔT (definition of
	// PRF.Sign). Tolerance 1e-3 °C (noiseless).
	p := newPhantom(24, 8)
	p.prf.Sign, p.prf.Alpha = -1, -0.0097
	p.rise = hotSpot(10, 2, 4)
	s := p.sonication(true)
	opt := DefaultThermometryOptions()
	opt.Drift = DriftNone
	opt.PRF.Sign, opt.PRF.Alpha = -1, -0.0097
	ts, err := Thermometry(s, opt)
	if err != nil {
		t.Fatal(err)
	}
	if e, _ := maxErr(p, ts); e > 1e-3 {
		t.Errorf("matching sign: max error %g °C", e)
	}
	opt.PRF.Sign = 1
	ts, err = Thermometry(s, opt)
	if err != nil {
		t.Fatal(err)
	}
	c := p.g.Index(12, 12, 0) // hottest voxel region, 1 mm from the centre
	want := 37 - p.truth(c, 7)
	if got := float64(ts.Frames[7][c]); math.Abs(got-want) > 1e-3 {
		t.Errorf("opposite sign: %g °C, want %g", got, want)
	}
}

func TestThermometryDriftRemoval(t *testing.T) {
	// A drift that is polynomial in space and linear in time is removed
	// exactly by a fit of the same order over the unheated reference
	// (least squares reproduces an exact model); tolerance 2e-3 °C
	// (float32 phase; for the automatic reference the Gaussian's tail
	// beyond 20 mm is below 2e-4 °C).
	outer := func(g Geometry) []bool {
		ref := make([]bool, g.Len())
		for n := range ref {
			pt := voxelPoint(g, n)
			ref[n] = math.Hypot(pt[0], pt[1]) > 20
		}
		return ref
	}
	cases := []struct {
		name   string
		method DriftMethod
		order  int
		drift  func(x, y float64, f int) float64
		auto   bool
	}{
		{"mean, uniform drift", DriftMean, 0, func(x, y float64, f int) float64 { return 0.15 * float64(f) }, false},
		{"poly 0, uniform drift", DriftPolynomial, 0, func(x, y float64, f int) float64 { return -0.1 * float64(f) }, false},
		{"poly 1, linear drift", DriftPolynomial, 1, func(x, y float64, f int) float64 {
			return float64(f) * (0.05 + 0.004*x - 0.003*y)
		}, false},
		{"poly 1, linear drift, automatic reference", DriftPolynomial, 1, func(x, y float64, f int) float64 {
			return float64(f) * (0.05 + 0.004*x - 0.003*y)
		}, true},
		{"poly 2, quadratic drift", DriftPolynomial, 2, func(x, y float64, f int) float64 {
			return float64(f) * (0.02 + 0.002*x + 0.001*y + 1e-4*x*x - 2e-4*x*y + 5e-5*y*y)
		}, false},
	}
	for _, c := range cases {
		p := newPhantom(40, 12)
		p.rise = hotSpot(20, 2, 5)
		p.drift = c.drift
		opt := DefaultThermometryOptions()
		opt.Drift, opt.DriftOrder = c.method, c.order
		if !c.auto {
			opt.Reference = outer(p.g)
		}
		ts, err := Thermometry(p.sonication(true), opt)
		if err != nil {
			t.Fatal(err)
		}
		if e, nan := maxErr(p, ts); e > 2e-3 || nan {
			t.Errorf("%s: max error %g °C after correction (NaN inside: %v)", c.name, e, nan)
		}
		// Without correction the same data are off by the drift.
		opt.Drift = DriftNone
		raw, _ := Thermometry(p.sonication(true), opt)
		if e, _ := maxErr(p, raw); e < 1 {
			t.Errorf("%s: uncorrected error only %g °C; the test drift is too small", c.name, e)
		}
		if c.method == DriftMean || c.order == 0 {
			// Quality.Drift is the removed drift in °C relative to the
			// baseline (the mean of frames 0 and 1), / PhasePerDegree.
			want := (c.drift(0, 0, 11) - (c.drift(0, 0, 0)+c.drift(0, 0, 1))/2) / p.prf.PhasePerDegree()
			if got := ts.Quality[11].Drift; math.Abs(got-want) > 1e-3 {
				t.Errorf("%s: Quality.Drift %g °C, want %g", c.name, got, want)
			}
		}
	}
}

func TestThermometryLowSignalAndMotion(t *testing.T) {
	p := newPhantom(32, 8)
	p.rise = hotSpot(8, 2, 3)
	s := p.sonication(true)
	// Frame 4: one object voxel loses its signal (below 0.1 of the 98th
	// percentile of the baseline magnitude).
	drop := p.g.Index(16, 5, 1)
	s.Magnitude[4][drop] = 5
	// Frame 6: the whole image moves by 6 voxels (magnitude and phase).
	shift := func(fr []float32) []float32 {
		out := make([]float32, len(fr))
		for n := range fr {
			i, j, k := p.g.IJK(n)
			out[n] = fr[p.g.Index((i+6)%p.g.Cols, j, k)]
		}
		return out
	}
	s.Magnitude[6], s.Phase[6] = shift(s.Magnitude[6]), shift(s.Phase[6])
	opt := DefaultThermometryOptions()
	opt.Drift = DriftNone
	ts, err := Thermometry(s, opt)
	if err != nil {
		t.Fatal(err)
	}
	if v := ts.Frames[4][drop]; v == v {
		t.Errorf("low-signal voxel: %g °C, want NaN", v)
	}
	if v := ts.Frames[5][drop]; v != v {
		t.Error("low-signal voxel stays NaN in the next frame")
	}
	if d := ts.Quality[4].Invalid - ts.Quality[3].Invalid; d != 1 {
		t.Errorf("frame 4 has %d more invalid voxels than frame 3, want 1", d)
	}
	for f, q := range ts.Quality {
		if f == 6 {
			if !q.Flagged || q.Invalid != p.g.Len() || q.Note == "" {
				t.Errorf("moved frame: %+v, want flagged with every voxel invalid", q)
			}
			for _, v := range ts.Frames[6] {
				if v == v {
					t.Fatal("moved frame keeps a temperature")
				}
			}
			continue
		}
		// Noiseless and static: r = 1 except for the one dropped voxel.
		if q.Flagged || !(q.Motion < 1e-2) {
			t.Errorf("frame %d: flagged %v, motion %g; want unflagged, ≈0", f, q.Flagged, q.Motion)
		}
	}
	checkHottest(t, ts)
	// The frame after the motion is unwrapped from the last valid frame.
	c := p.g.Index(16, 16, 0)
	if got, want := float64(ts.Frames[7][c]), 37+p.truth(c, 7); math.Abs(got-want) > 1e-3 {
		t.Errorf("after the flagged frame: %g °C, want %g", got, want)
	}
}

func TestThermometryNoise(t *testing.T) {
	// Complex Gaussian noise of σ = m/50 per channel: magnitude SNR 50, phase
	// noise 1/50 rad. Reference (testdata/check-values.md, computed): Sigma =
	// √2/(|γαB0TE|·SNR) = 0.275 °C at 3 T, TE 12.8 ms; the measured temporal
	// standard deviation after a baseline of N frames is
	// (1/SNR)·√(1+1/N)/|γαB0TE|. Tolerance 5 % (≈1000 voxels × frames;
	// the median estimator's bias is below 2 %).
	p := newPhantom(32, 24)
	p.snr = 50
	opt := DefaultThermometryOptions()
	opt.Drift = DriftNone
	opt.BaselineFrames = 8
	for _, withMag := range []bool{true, false} {
		ts, err := Thermometry(p.sonication(withMag), opt)
		if err != nil {
			t.Fatal(err)
		}
		var sig []float64
		var ss float64
		cnt := 0
		for n := range ts.Sigma {
			pt := voxelPoint(p.g, n)
			if !p.inside(pt[0], pt[1]) {
				continue
			}
			sig = append(sig, float64(ts.Sigma[n]))
			for f := 8; f < 24; f++ {
				d := float64(ts.Frames[f][n]) - 37
				ss += d * d
				cnt++
			}
		}
		slices.Sort(sig)
		med := sig[len(sig)/2]
		want := 0.275
		tol := 0.05
		if !withMag {
			// Per-voxel estimate from 7 degrees of freedom: the median of
			// √(χ²₇/7) is 0.953 (Wilson–Hilferty), so allow 10 %.
			tol = 0.1
		}
		if relErr(med, want) > tol {
			t.Errorf("magnitude %v: median Sigma %g °C, want %g ± %g%%", withMag, med, want, 100*tol)
		}
		sd := math.Sqrt(ss / float64(cnt))
		wantSD := (1.0 / 50) * math.Sqrt(1+1.0/8) / math.Abs(p.prf.PhasePerDegree())
		if relErr(sd, wantSD) > 0.05 {
			t.Errorf("magnitude %v: temporal SD %g °C, want %g", withMag, sd, wantSD)
		}
		if withMag {
			if q := ts.Quality[10]; relErr(q.SNR, 50) > 0.1 {
				t.Errorf("frame SNR %g, want about 50", q.SNR)
			}
		}
	}
	// Fewer than 2 baseline frames with magnitude, or 3 without: unknown.
	opt.BaselineFrames = 1
	ts, _ := Thermometry(p.sonication(true), opt)
	if v := ts.Sigma[p.g.Index(16, 16, 0)]; v == v {
		t.Errorf("one baseline frame: Sigma %g, want NaN (unknown)", v)
	}
}

func TestThermometryPassThrough(t *testing.T) {
	g := NewAxialGeometry(2, 2, 1, Vec3{1, 1, 1}, Vec3{})
	nan := float32(math.NaN())
	s := &Sonication{Number: 1, Geometry: g, Times: []float64{0, 2},
		Temperature: [][]float32{{37, 37, 37, nan}, {40, 50, 37, nan}}}
	ts, err := Thermometry(s, DefaultThermometryOptions())
	if err != nil {
		t.Fatal(err)
	}
	if ts.Frames[1][1] != 50 || ts.Quality[1].Invalid != 1 || ts.Sigma[0] == ts.Sigma[0] {
		t.Errorf("pass-through: %+v", ts)
	}
	checkHottest(t, ts)
}

// checkHottest compares each frame's Hottest with a search of the frame:
// the first valid voxel of the largest value, -1 for a frame without one.
func checkHottest(t *testing.T, ts *TemperatureSeries) {
	t.Helper()
	for f, fr := range ts.Frames {
		want, best := -1, float32(0)
		for n, v := range fr {
			if v == v && (want < 0 || v > best) {
				want, best = n, v
			}
		}
		if got := ts.Quality[f].Hottest; got != want {
			t.Errorf("frame %d: hottest voxel %d, want %d", f, got, want)
		}
	}
}

func TestThermometryErrors(t *testing.T) {
	p := newPhantom(8, 3)
	good := func() *Sonication { s := p.sonication(true); s.Number = 4; return s }
	cases := []struct {
		name string
		edit func(*Sonication, *ThermometryOptions)
		want []string // substrings of the error
	}{
		{"no B0", func(s *Sonication, o *ThermometryOptions) { s.B0 = 0 }, []string{"sonication 4", "MagneticFieldStrength"}},
		{"no TE", func(s *Sonication, o *ThermometryOptions) { s.TE = 0 }, []string{"sonication 4", "EchoTime"}},
		{"neither", func(s *Sonication, o *ThermometryOptions) { s.B0, s.TE = 0, 0 }, []string{"MagneticFieldStrength", "EchoTime"}},
		{"short frame", func(s *Sonication, o *ThermometryOptions) { s.Phase[1] = s.Phase[1][:5] }, []string{"sonication 4", "phase frame 2"}},
		{"magnitude count", func(s *Sonication, o *ThermometryOptions) { s.Magnitude = s.Magnitude[:2] }, []string{"2 magnitude frames for 3"}},
		{"times", func(s *Sonication, o *ThermometryOptions) { s.Times = []float64{0, 3, 3} }, []string{"frame 3 time"}},
		{"dose map", func(s *Sonication, o *ThermometryOptions) {
			s.Phase, s.Magnitude, s.Dose = nil, nil, make([]float32, 128)
		}, []string{"dose map"}},
		{"grid", func(s *Sonication, o *ThermometryOptions) { s.Geometry.Spacing[0] = 0 }, []string{"spacing"}},
		{"reference", func(s *Sonication, o *ThermometryOptions) { o.Reference = make([]bool, 3) }, []string{"reference mask"}},
		{"order", func(s *Sonication, o *ThermometryOptions) { o.DriftOrder = 3 }, []string{"order 3"}},
	}
	for _, c := range cases {
		s := good()
		o := DefaultThermometryOptions()
		c.edit(s, &o)
		_, err := Thermometry(s, o)
		if err == nil {
			t.Errorf("%s: no error", c.name)
			continue
		}
		for _, w := range c.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: error %q lacks %q", c.name, err, w)
			}
		}
	}
	// B0 and TE from the options stand in for missing attributes.
	s := good()
	s.B0, s.TE = 0, 0
	o := DefaultThermometryOptions()
	o.PRF.B0, o.PRF.TE = 3, 12.8e-3
	if _, err := Thermometry(s, o); err != nil {
		t.Errorf("B0/TE from options: %v", err)
	}
}

func TestNthSmallest(t *testing.T) {
	// Reference: the k-th element of the sorted slice (seeded, with ties).
	rng := rand.New(rand.NewPCG(8, 8))
	for trial := 0; trial < 200; trial++ {
		v := make([]float64, 1+rng.IntN(300))
		for i := range v {
			v[i] = float64(rng.IntN(50))
		}
		k := rng.IntN(len(v))
		s := slices.Clone(v)
		slices.Sort(s)
		if got := nthSmallest(v, k); got != s[k] {
			t.Fatalf("k = %d of %d: %g, want %g", k, len(v), got, s[k])
		}
	}
}

func TestSliceFitDowndate(t *testing.T) {
	// The normal matrix of a frame with NaN reference voxels, obtained by
	// removing their terms from the full matrix, gives the coefficients of
	// the matrix summed over the valid voxels directly (to 1e-9 relative:
	// the subtraction loses a few digits of the float64 sums), for orders 1
	// and 2 and a few to nearly half the voxels NaN.
	g := NewAxialGeometry(40, 30, 1, Vec3{1.5, 1.5, 3}, Vec3{})
	rng := rand.New(rand.NewPCG(21, 4))
	ref := make([]bool, g.Len())
	mag := make([]float32, g.Len())
	for n := range ref {
		ref[n] = rng.Float64() < 0.8
		mag[n] = float32(500 + 500*rng.Float64())
	}
	for _, order := range []int{1, 2} {
		for _, frac := range []float64{0.01, 0.2, 0.45} {
			sf := newSliceFit(g, 0, ref, mag, order, nil)
			v := make([]float32, g.Len())
			for n := range v {
				x, y := float64(n%g.Cols), float64(n/g.Cols)
				v[n] = float32(0.3 + 0.01*x - 0.02*y + 1e-4*x*y + 0.05*rng.NormFloat64())
				if rng.Float64() < frac {
					v[n] = float32(math.NaN())
				}
			}
			got, err := sf.fit(v)
			if err != nil {
				t.Fatal(err)
			}
			ch, err := sf.factor(v, nil) // summed over the valid voxels
			if err != nil {
				t.Fatal(err)
			}
			rhsFit, err := fitWith(sf, v, ch)
			if err != nil {
				t.Fatal(err)
			}
			for r := 0; r < polyTerms(order); r++ {
				if d := math.Abs(got[r] - rhsFit[r]); d > 1e-9*math.Max(1, math.Abs(rhsFit[r])) {
					t.Errorf("order %d, %.0f%% NaN: coefficient %d %g downdated, %g direct", order, 100*frac, r, got[r], rhsFit[r])
				}
			}
		}
	}
}

// fitWith is sliceFit.fit with the factorisation ch given.
func fitWith(sf *sliceFit, v []float32, ch *mat.Cholesky) ([6]float64, error) {
	var rhs [6]float64
	for p, n := range sf.idx {
		u := v[n]
		if u != u {
			continue
		}
		b := sf.basis(int(n))
		for r := 0; r < sf.terms; r++ {
			rhs[r] += sf.w[p] * float64(u) * b[r]
		}
	}
	var c mat.VecDense
	var cf [6]float64
	if err := ch.SolveVecTo(&c, mat.NewVecDense(sf.terms, rhs[:sf.terms])); err != nil {
		return cf, err
	}
	for r := 0; r < sf.terms; r++ {
		cf[r] = c.AtVec(r)
	}
	return cf, nil
}

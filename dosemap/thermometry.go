package dosemap

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/mat"
)

// DriftMethod selects how Thermometry removes the slow background phase
// drift (main-field drift, shim heating) that PRF thermometry mistakes for
// temperature change.
type DriftMethod int

// Drift correction methods.
const (
	// DriftNone leaves the phase as measured.
	DriftNone DriftMethod = iota
	// DriftMean subtracts, frame by frame, the mean phase change of the
	// reference region (one value for the whole volume).
	DriftMean
	// DriftPolynomial fits, frame by frame and slice by slice, a 2-D
	// polynomial of order DriftOrder (0–2) in the in-plane coordinates to
	// the phase change of the reference region by weighted least squares,
	// and subtracts it everywhere in the slice. Weights are the squared
	// baseline magnitude (the inverse of the phase-noise variance); 1 when
	// there is no magnitude. This is the background model of referenceless
	// thermometry (Rieke et al., Magn Reson Med 2004;51:1223) applied to the
	// phase difference.
	DriftPolynomial
)

// String returns "none", "mean" or "polynomial".
func (d DriftMethod) String() string {
	switch d {
	case DriftMean:
		return "mean"
	case DriftPolynomial:
		return "polynomial"
	}
	return "none"
}

// ParseDriftMethod returns the method named "none", "mean" or "polynomial".
func ParseDriftMethod(name string) (DriftMethod, error) {
	switch name {
	case "none":
		return DriftNone, nil
	case "mean":
		return DriftMean, nil
	case "polynomial":
		return DriftPolynomial, nil
	}
	return 0, fmt.Errorf("drift correction %q: want none, mean or polynomial", name)
}

// MarshalText writes the method by name (JSON: "none", "mean" or
// "polynomial").
func (d DriftMethod) MarshalText() ([]byte, error) {
	if d < DriftNone || d > DriftPolynomial {
		return nil, fmt.Errorf("drift correction %d is not a method", int(d))
	}
	return []byte(d.String()), nil
}

// UnmarshalText reads a method written by MarshalText.
func (d *DriftMethod) UnmarshalText(b []byte) error {
	v, err := ParseDriftMethod(string(b))
	if err == nil {
		*d = v
	}
	return err
}

// ThermometryOptions are the settings of Thermometry. A zero field takes the
// default of DefaultThermometryOptions, except Drift and DriftOrder, whose
// zero values are meaningful; a negative MinMagnitude or MaxMotion turns that
// check off.
type ThermometryOptions struct {
	// PRF gives α and the phase sign; B0 (T) and TE (s) override the
	// sonication's values when non-zero.
	PRF PRF
	// BaselineFrames is the number of frames at the start of each series,
	// before heating, whose complex mean is the phase reference (default 2;
	// clamped to the number of frames).
	BaselineFrames int
	// BodyTemp is the temperature (°C) of the tissue in the baseline frames;
	// the result is BodyTemp + ΔT (default 37).
	BodyTemp float64
	// Drift and DriftOrder select the drift correction (default
	// DriftPolynomial of order 1).
	Drift      DriftMethod
	DriftOrder int
	// Reference marks the unheated voxels the drift is measured in (one
	// value per voxel). Nil selects it automatically: the hottest spot is
	// the voxel of largest 3×3-smoothed peak phase change after a
	// per-slice first-order (or DriftOrder) background fit; the reference
	// is every voxel with signal whose in-plane distance from it is at
	// least max(20 mm, a quarter of the smaller in-plane field of view).
	Reference []bool
	// MinMagnitude is a fraction of the 98th percentile of the baseline
	// magnitude: a voxel whose baseline magnitude, or whose magnitude in a
	// frame, falls below it is NaN in every frame, or in that frame (default
	// 0.1). Ignored without magnitude images.
	MinMagnitude float64
	// MaxMotion flags a frame whose magnitude image correlates with the
	// baseline magnitude by less than 1 − MaxMotion (Pearson r over every
	// other voxel of the volume, background included); a flagged frame is
	// NaN throughout (default 0.1, i.e. r < 0.9).
	MaxMotion float64
}

// Defaults of ThermometryOptions.
const (
	DefaultBaselineFrames = 2
	DefaultMinMagnitude   = 0.1
	DefaultMaxMotion      = 0.1
)

// DefaultThermometryOptions returns α = −0.01 ppm/°C, sign +1, B0 and TE
// from the series, 2 baseline frames, body temperature 37 °C, first-order
// polynomial drift correction in an automatic reference region, magnitude
// threshold 0.1 and motion threshold 0.1.
func DefaultThermometryOptions() ThermometryOptions {
	return ThermometryOptions{
		PRF:            PRF{Alpha: DefaultAlpha, Sign: 1},
		BaselineFrames: DefaultBaselineFrames,
		BodyTemp:       DefaultBodyTemp,
		Drift:          DriftPolynomial,
		DriftOrder:     1,
		MinMagnitude:   DefaultMinMagnitude,
		MaxMotion:      DefaultMaxMotion,
	}
}

func (o ThermometryOptions) withDefaults() ThermometryOptions {
	d := DefaultThermometryOptions()
	if o.PRF.Alpha == 0 {
		o.PRF.Alpha = d.PRF.Alpha
	}
	if o.PRF.Sign == 0 {
		o.PRF.Sign = 1
	}
	if o.BaselineFrames <= 0 {
		o.BaselineFrames = d.BaselineFrames
	}
	if o.BodyTemp == 0 {
		o.BodyTemp = d.BodyTemp
	}
	if o.MinMagnitude == 0 {
		o.MinMagnitude = d.MinMagnitude
	}
	if o.MaxMotion == 0 {
		o.MaxMotion = d.MaxMotion
	}
	return o
}

// FrameQuality describes one thermometry frame.
type FrameQuality struct {
	Time    float64 // seconds from the series start
	Motion  float64 // 1 − r, r the Pearson correlation of magnitude with baseline magnitude; NaN without magnitude
	Drift   float64 // mean drift removed over the reference region, °C
	SNR     float64 // mean magnitude SNR over the valid voxels; NaN when unknown
	Wraps   int     // voxels whose temporal unwrapping added or removed a turn in this frame
	Invalid int     // NaN voxels in the frame
	Flagged bool    // frame rejected (motion); all its voxels are NaN
	Note    string  // why the frame was flagged, or other remarks
	Hottest int     // index of the hottest valid voxel (the first of equals); -1 when none
}

// TemperatureSeries is the temperature of one sonication, frame by frame.
type TemperatureSeries struct {
	Geometry Geometry
	Times    []float64   // seconds from the series start, increasing
	Frames   [][]float32 // absolute °C per frame, NaN invalid
	Sigma    []float32   // per-voxel noise °C (NaN unknown)
	Quality  []FrameQuality
	slab     []float32 // Frames' storage when Thermometry allocated it (see Release)
}

// Release hands the frames of a series Thermometry computed back for reuse
// by later calls, so that a review of many sonications that keeps only
// part of each series does not claim fresh memory for every one; ts and
// its frames must not be used afterwards. It does nothing for other
// series.
func (ts *TemperatureSeries) Release() {
	if ts == nil || ts.slab == nil {
		return
	}
	putSlab(ts.slab)
	ts.slab, ts.Frames = nil, nil
}

// Peak returns the highest valid temperature of every voxel over the
// frames of ts (°C, NaN where no frame is valid), on ts's grid.
func (ts *TemperatureSeries) Peak() *Volume {
	v := NewVolume(ts.Geometry)
	pk := v.Data
	ninf := float32(math.Inf(-1))
	for i := range pk {
		pk[i] = ninf
	}
	for _, fr := range ts.Frames {
		maxInto(pk, fr[:len(pk)])
	}
	nan := float32(math.NaN())
	for i, x := range pk {
		if x == ninf {
			pk[i] = nan
		}
	}
	return v
}

// maxInto sets dst[i] to src[i] where src[i] > dst[i] (len(src) ≥
// len(dst)): a NaN in src leaves dst as it is, and so does a zero of the
// other sign. The vector kernel, where there is one, does the same to the
// bit.
func maxInto(dst, src []float32) {
	src = src[:len(dst)]
	n := 0
	if vectorKernels && len(dst) >= 16 {
		n = len(dst) &^ 15
		maxIntoAVX2(&dst[0], &src[0], n)
	}
	for i := n; i < len(dst); i++ {
		// x > d is false for a NaN x.
		if x := src[i]; x > dst[i] {
			dst[i] = x
		}
	}
}

// Thermometry converts the phase (and magnitude) frames of s into
// temperature by the PRF shift (see PRF):
//
//  1. The reference is the complex mean of the first BaselineFrames frames,
//     z_ref = mean(m·e^{iφ}) (m = 1 without magnitude). The phase change of
//     frame t is Δφ_t = arg(z_t·conj(z_ref)), wrapped into (−π, π].
//  2. Δφ is unwrapped in time voxel by voxel (Itoh's method: the turn count
//     is chosen so that the change from the previous valid frame lies in
//     (−π, π]), so rises beyond PRF.WrapLimit are tracked as long as the
//     change between frames stays below it. FrameQuality.Wraps counts the
//     voxels where a turn was added or removed.
//  3. The drift of the reference region is removed (opt.Drift).
//  4. T = BodyTemp + Δφ / PRF.PhasePerDegree.
//
// Low-signal voxels and frames flagged for motion are NaN, never zero.
// Sigma is NoiseSigma(SNR) per voxel, with SNR = baseline mean magnitude
// divided by the slice's noise level, estimated robustly (median) from the
// temporal variance of the magnitude over the baseline frames (two or more
// needed); without magnitude, SNR = 1/σ_φ from the voxel's temporal phase
// standard deviation over the baseline (three or more frames needed);
// otherwise Sigma is NaN. The √2 of NoiseSigma makes Sigma exact for a
// one-frame baseline and conservative for longer ones.
//
// A temperature-map sonication passes through: its frames are shared, not
// copied, and Sigma is NaN. B0 and TE come from opt.PRF when non-zero, else
// from s; when neither has them the error names the sonication and the
// missing attribute.
func Thermometry(s *Sonication, opt ThermometryOptions) (*TemperatureSeries, error) {
	if s == nil {
		return nil, errors.New("thermometry: no sonication")
	}
	name := sonicationName(s)
	opt = opt.withDefaults()
	g := s.Geometry
	if err := g.Validate(); err != nil {
		return nil, fmt.Errorf("%s: thermometry grid: %w", name, err)
	}
	nv := g.Len()
	if s.Phase == nil && s.Source != nil && s.Temperature == nil {
		// Frames kept in the files: decode them for this call.
		r, notes, done, err := s.Resident(context.Background())
		if err != nil {
			return nil, fmt.Errorf("%s: reading the thermometry frames: %w", name, err)
		}
		defer done()
		ts, err := Thermometry(r, opt)
		if err == nil && len(notes) > 0 && len(ts.Quality) > 0 {
			ts.Quality[0].Note = joinNote(ts.Quality[0].Note, strings.Join(notes, "; "))
		}
		return ts, err
	}
	switch {
	case s.Temperature != nil:
		return passThrough(s, name)
	case s.Phase == nil && s.Dose != nil:
		return nil, fmt.Errorf("%s is a ready-made dose map and holds no thermometry frames", name)
	case len(s.Phase) == 0:
		return nil, fmt.Errorf("%s holds no thermometry frames", name)
	}
	nf := len(s.Phase)
	if err := checkFrames(name, "phase", s.Phase, nv); err != nil {
		return nil, err
	}
	mag := s.Magnitude
	if len(mag) == 0 {
		mag = nil
	}
	if mag != nil {
		if len(mag) != nf {
			return nil, fmt.Errorf("%s: %d magnitude frames for %d phase frames", name, len(mag), nf)
		}
		if err := checkFrames(name, "magnitude", mag, nv); err != nil {
			return nil, err
		}
	}
	if err := checkTimes(name, s.Times, nf); err != nil {
		return nil, err
	}
	p := opt.PRF
	if p.B0 == 0 {
		p.B0 = s.B0
	}
	if p.TE == 0 {
		p.TE = s.TE
	}
	var miss []string
	if !(p.B0 > 0) || math.IsInf(p.B0, 0) {
		miss = append(miss, "the field strength B0 (MagneticFieldStrength, 0018,0087)")
	}
	if !(p.TE > 0) || math.IsInf(p.TE, 0) {
		miss = append(miss, "the echo time TE (EchoTime, 0018,0081)")
	}
	if len(miss) > 0 {
		what := miss[0]
		if len(miss) == 2 {
			what += " and " + miss[1]
		}
		return nil, fmt.Errorf("%s: PRF thermometry needs %s, which the series lacks; enter it in the thermometry settings", name, what)
	}
	if opt.Reference != nil && len(opt.Reference) != nv {
		return nil, fmt.Errorf("%s: drift reference mask holds %d values for %d voxels", name, len(opt.Reference), nv)
	}
	if opt.Drift == DriftPolynomial && (opt.DriftOrder < 0 || opt.DriftOrder > 2) {
		return nil, fmt.Errorf("drift polynomial order %d is not 0, 1 or 2", opt.DriftOrder)
	}
	sc := getScratch()
	defer sc.put()
	t := &thermo{s: s, g: g, p: p, opt: opt, mag: mag, nv: nv, nf: nf, nb: min(opt.BaselineFrames, nf), sc: sc}
	return t.run(), nil
}

func checkFrames(name, kind string, frames [][]float32, nv int) error {
	for n, f := range frames {
		if len(f) != nv {
			return fmt.Errorf("%s: %s frame %d holds %d values for %d voxels", name, kind, n+1, len(f), nv)
		}
	}
	return nil
}

func checkTimes(name string, times []float64, nf int) error {
	if len(times) != nf {
		return fmt.Errorf("%s: %d frame times for %d frames", name, len(times), nf)
	}
	for n, t := range times {
		if math.IsNaN(t) || math.IsInf(t, 0) {
			return fmt.Errorf("%s: frame %d has no valid acquisition time", name, n+1)
		}
		if n > 0 && !(t > times[n-1]) {
			return fmt.Errorf("%s: frame %d time %.3f s does not follow frame %d time %.3f s", name, n+1, t, n, times[n-1])
		}
	}
	return nil
}

func passThrough(s *Sonication, name string) (*TemperatureSeries, error) {
	nv := s.Geometry.Len()
	if err := checkFrames(name, "temperature", s.Temperature, nv); err != nil {
		return nil, err
	}
	if err := checkTimes(name, s.Times, len(s.Temperature)); err != nil {
		return nil, err
	}
	ts := &TemperatureSeries{Geometry: s.Geometry, Times: s.Times, Frames: s.Temperature,
		Sigma: nanSlice(nv), Quality: make([]FrameQuality, len(s.Temperature))}
	for n, f := range s.Temperature {
		q := &ts.Quality[n]
		q.Time, q.Motion, q.SNR = s.Times[n], math.NaN(), math.NaN()
		q.Note = "temperature map from the scanner"
		q.Hottest = -1
		hot := float32(math.Inf(-1))
		for i, v := range f {
			if v != v {
				q.Invalid++
			} else if v > hot {
				hot, q.Hottest = v, i
			}
		}
	}
	return ts, nil
}

func nanSlice(n int) []float32 {
	s := make([]float32, n)
	nan := float32(math.NaN())
	for i := range s {
		s[i] = nan
	}
	return s
}

// thermo carries the working state of one Thermometry call.
type thermo struct {
	s          *Sonication
	g          Geometry
	p          PRF
	opt        ThermometryOptions
	mag        [][]float32
	nv, nf, nb int

	ref     []float64 // reference phase, NaN for voxels without signal
	baseMag []float32 // baseline mean magnitude (nil without magnitude)
	magThr  float32   // absolute magnitude threshold
	noise   []float64 // per-slice magnitude noise σ (nil when unknown)
	pass    []float32 // stand-in magnitudes for phase-only series
	runs    []int32   // [start, end) pairs of consecutive voxels with signal
	ref32   []float32 // ref in float32 for the frame loop (rounding ≤ 1.2e-7 rad)
	// drift[f*Slices+s] are the coefficients of the drift polynomial
	// (see sliceFit.basis) removed from slice s of frame f in
	// toTemperature, valid where hasDrift is set.
	drift    [][6]float64
	hasDrift []bool
	// Automatic reference: the lattice voxels with signal, their per-slice
	// fits and the peak background-corrected phase change (referenceMask).
	lat     []bool
	latFits []*sliceFit
	peak    []float64
	// Drift correction: the reference region and its per-slice fits.
	driftRef []bool
	fits     []*sliceFit
	out      *TemperatureSeries
	sc       *scratch // working buffers (none may end up in out)
}

func (t *thermo) run() *TemperatureSeries {
	ts := &TemperatureSeries{Geometry: t.g, Times: append([]float64(nil), t.s.Times...),
		Frames: make([][]float32, t.nf), Quality: make([]FrameQuality, t.nf)}
	t.out = ts
	t.baseline()
	t.signalRuns()
	ts.Sigma = t.sigma()
	if t.opt.Drift != DriftNone && t.opt.Reference == nil {
		t.startPeaks()
	}
	t.unwrap()
	t.toTemperature()
	if t.nb < t.opt.BaselineFrames {
		ts.Quality[0].Note = joinNote(ts.Quality[0].Note, fmt.Sprintf("only %d baseline frames available", t.nb))
	}
	return ts
}

// baseline computes the reference phase, the baseline magnitude and the
// magnitude threshold. The magnitude comes first, so the trigonometry of
// the reference phase is done only for voxels with signal (the others are
// NaN whatever their phase).
func (t *thermo) baseline() {
	nv := t.nv
	t.ref = t.sc.f64.get(nv)
	cnt := t.sc.i32.get(nv)
	var msum []float64
	if t.mag != nil {
		msum = t.sc.f64.get(nv)
	}
	for f := 0; f < t.nb; f++ {
		ph := t.s.Phase[f]
		cnt := cnt[:len(ph)]
		if t.mag == nil {
			for n, v := range ph {
				if v == v {
					cnt[n]++
				}
			}
			continue
		}
		mg, ms := t.mag[f][:len(ph)], msum[:len(ph)]
		for n, v := range ph {
			m := float64(mg[n])
			if v != v || m != m {
				continue
			}
			cnt[n]++
			ms[n] += m
		}
	}
	if t.mag != nil {
		t.baseMag = t.sc.f32.get(nv)
		vals := t.sc.f32.get(nv)[:0]
		for n := range msum {
			if cnt[n] == 0 {
				t.baseMag[n] = float32(math.NaN())
				continue
			}
			t.baseMag[n] = float32(msum[n] / float64(cnt[n]))
			vals = append(vals, t.baseMag[n])
		}
		if t.opt.MinMagnitude > 0 && len(vals) > 0 {
			p98 := nthSmallest(vals, min(len(vals)-1, int(0.98*float64(len(vals)))))
			t.magThr = float32(t.opt.MinMagnitude) * p98
		}
	}
	// arg Σ m·e^{iφ_f} = φ₀ + arg Σ m·e^{i(φ_f − φ₀)}, φ₀ the voxel's first
	// valid baseline phase: the differences are mostly small (noise), where
	// sincosSmall spares the general sine and cosine.
	for n := range t.ref {
		t.ref[n] = math.NaN()
		if cnt[n] == 0 {
			continue // no valid baseline frame
		}
		if m := t.baseMag; m != nil && !(m[n] >= t.magThr && (t.magThr != 0 || m[n] > 0)) {
			continue // signal below the magnitude threshold
		}
		var re, im, phi0 float64
		first := true
		for f := 0; f < t.nb; f++ {
			v := t.s.Phase[f][n]
			m := 1.0
			if t.mag != nil {
				m = float64(t.mag[f][n])
			}
			if v != v || m != m {
				continue
			}
			if first {
				phi0, first = float64(v), false
				re += m
				continue
			}
			sn, cs := sincosSmall(float64(v) - phi0)
			re += m * cs
			im += m * sn
		}
		if re == 0 && im == 0 {
			continue
		}
		t.ref[n] = wrapPhase(phi0 + atan2Small(im, re))
	}
}

// atan2Small returns math.Atan2(y, x); for x > 0 and |y| ≤ x/10 by the
// Taylor series of atan(y/x) to the 11th power (truncation error below
// 0.1¹³/13 ≈ 8e-15).
func atan2Small(y, x float64) float64 {
	if !(x > 0) || !(math.Abs(y) <= 0.1*x) {
		return math.Atan2(y, x)
	}
	const a3, a5, a7, a9, a11 = -1.0 / 3, 1.0 / 5, -1.0 / 7, 1.0 / 9, -1.0 / 11
	q := y / x
	q2 := q * q
	return q * (1 + q2*(a3+q2*(a5+q2*(a7+q2*(a9+q2*a11)))))
}

// sincosSmall returns sin x and cos x: by their Taylor series to x¹¹ and
// x¹² for |x| ≤ π/4 (truncation error below |x|¹³/13! ≈ 7e-12), else by
// math.Sincos.
func sincosSmall(x float64) (sin, cos float64) {
	if !(x >= -math.Pi/4 && x <= math.Pi/4) {
		return math.Sincos(x)
	}
	x2 := x * x
	// Horner form with the coefficients ±1/n! (constants, no division).
	const (
		s3, s5, s7, s9, s11 = -1.0 / 6, 1.0 / 120, -1.0 / 5040, 1.0 / 362880, -1.0 / 39916800
		c2, c4, c6, c8, c10 = -1.0 / 2, 1.0 / 24, -1.0 / 720, 1.0 / 40320, -1.0 / 3628800
		c12                 = 1.0 / 479001600
	)
	sin = x * (1 + x2*(s3+x2*(s5+x2*(s7+x2*(s9+x2*s11)))))
	cos = 1 + x2*(c2+x2*(c4+x2*(c6+x2*(c8+x2*(c10+x2*c12)))))
	return sin, cos
}

// signalRuns records the runs of consecutive voxels with signal (a finite
// reference phase), so the frame loops skip the background in blocks.
func (t *thermo) signalRuns() {
	t.runs = t.runs[:0]
	t.ref32 = t.sc.f32.get(len(t.ref))
	in := false
	for n, r := range t.ref {
		t.ref32[n] = float32(r)
		if has := r == r; has != in {
			t.runs = append(t.runs, int32(n))
			in = has
		}
	}
	if in {
		t.runs = append(t.runs, int32(len(t.ref)))
	}
}

// sigma estimates the per-voxel temperature noise from the baseline frames.
func (t *thermo) sigma() []float32 {
	sig := nanSlice(t.nv)
	g := t.g
	sl := g.SliceLen()
	if t.mag != nil && t.nb >= 2 {
		// Per-slice noise σ: the median of the voxels' temporal variances
		// divided by the median of χ²_k/k (Wilson–Hilferty approximation,
		// k = nb−1), so heated, moving or flowing voxels do not inflate it.
		k := float64(t.nb - 1)
		medChi := math.Pow(1-2/(9*k), 3)
		t.noise = make([]float64, g.Slices)
		vars := t.sc.f64.get(sl)[:0]
		for s := 0; s < g.Slices; s++ {
			vars = vars[:0]
			for n := s * sl; n < (s+1)*sl; n++ {
				if math.IsNaN(t.ref[n]) {
					continue
				}
				mean := float64(t.baseMag[n])
				var ss float64
				ok := true
				for f := 0; f < t.nb; f++ {
					m := float64(t.mag[f][n])
					if m != m {
						ok = false
						break
					}
					ss += (m - mean) * (m - mean)
				}
				if ok {
					vars = append(vars, ss/k)
				}
			}
			t.noise[s] = math.NaN()
			if len(vars) >= 10 {
				t.noise[s] = math.Sqrt(nthSmallest(vars, len(vars)/2) / medChi)
			}
		}
		absPPD := math.Abs(t.p.PhasePerDegree())
		for s, noise := range t.noise {
			if !(noise > 0) {
				continue
			}
			for n := s * sl; n < (s+1)*sl; n++ {
				if math.IsNaN(t.ref[n]) {
					continue
				}
				sig[n] = float32(sigmaOfSNR(absPPD, float64(t.baseMag[n])/noise))
			}
		}
		return sig
	}
	if t.mag == nil && t.nb >= 3 {
		for n := range sig {
			if math.IsNaN(t.ref[n]) {
				continue
			}
			var ss float64
			ok := true
			for f := 0; f < t.nb; f++ {
				v := float64(t.s.Phase[f][n])
				if v != v {
					ok = false
					break
				}
				d := wrapPhase(v - t.ref[n])
				ss += d * d
			}
			if ok && ss > 0 {
				sigPhi := math.Sqrt(ss / float64(t.nb-1))
				sig[n] = float32(t.p.NoiseSigma(1 / sigPhi))
			}
		}
	}
	return sig
}

// unwrap computes the temporally unwrapped phase change of every frame into
// the output frames (radians for now), with motion and signal checks.
func (t *thermo) unwrap() {
	nv := t.nv
	last := t.sc.f32.get(nv) // last valid unwrapped phase change
	// Its number of turns; int16 holds ±32767 turns, i.e. phase changes of
	// 2·10⁵ rad, far beyond any temperature.
	turns := t.sc.i16.get(nv)
	nan := float32(math.NaN())
	slab := getSlab(t.nf * nv) // all frames in one allocation (every value is written below)
	t.out.slab = slab
	var mc motionCheck
	if t.mag != nil {
		mc = newMotionCheck(t.baseMag, 2)
	}
	for f := 0; f < t.nf; f++ {
		q := &t.out.Quality[f]
		q.Time = t.s.Times[f]
		q.Motion, q.SNR = math.NaN(), math.NaN()
		out := slab[f*nv : (f+1)*nv : (f+1)*nv]
		t.out.Frames[f] = out
		ph := t.s.Phase[f]
		var mf []float32
		if t.mag != nil {
			mf = t.mag[f]
			q.Motion = 1 - mc.correlation(mf)
			if t.opt.MaxMotion > 0 && !(q.Motion <= t.opt.MaxMotion) {
				q.Flagged = true
				q.Note = fmt.Sprintf("motion: magnitude correlation with baseline %.3f below %.3f", 1-q.Motion, 1-t.opt.MaxMotion)
				for n := range out {
					out[n] = nan
				}
				q.Invalid = nv
				continue
			}
		}
		thr := t.magThr
		wraps := 0
		if mf == nil {
			mf = t.noMagnitude(len(ph))
		}
		prev := 0
		for r := 0; r < len(t.runs); r += 2 {
			lo, hi := int(t.runs[r]), int(t.runs[r+1])
			for n := prev; n < lo; n++ {
				out[n] = nan // background: no signal
			}
			prev = hi
			wraps += unwrapRun(ph[lo:hi], t.ref32[lo:hi], last[lo:hi], turns[lo:hi], out[lo:hi], mf[lo:hi], thr)
		}
		for n := prev; n < nv; n++ {
			out[n] = nan
		}
		q.Wraps = wraps
		if t.latFits != nil && f >= t.nb {
			t.updatePeaks(out) // while the frame is in cache
		}
	}
}

// unwrapRun unwraps the phase phr of one run of voxels with signal against
// their reference phase ref: the change w = wrapPhase(phr − ref) takes the
// turn count k that brings it nearest to the voxel's last valid change
// (k = 0 when within ±π of it, nearly always), u = w + 2πk goes into out
// and lastf, k into turnsf. A voxel whose phase is NaN or whose magnitude mr is
// below thr is NaN in out and keeps last and turns. It returns the number
// of voxels whose turn count changed.
func unwrapRun(phr, ref, lastf []float32, turnsf []int16, outf, mr []float32, thr float32) (wraps int) {
	const twoPi = 2 * math.Pi
	const invTwoPi = 1 / twoPi
	nan := float32(math.NaN())
	// Equal lengths let the compiler drop the bounds checks.
	ref, lastf, turnsf, outf, mr = ref[:len(phr)], lastf[:len(phr)], turnsf[:len(phr)], outf[:len(phr)], mr[:len(phr)]
	for n, v := range phr {
		if v != v || !(mr[n] >= thr) {
			outf[n] = nan
			continue
		}
		w := wrapPhase(float64(v) - float64(ref[n]))
		// Nearest turn count k to the last change: 0 when within
		// ±π of it (nearly always); otherwise floor by truncation
		// after an offset of 2^20 turns (phase changes of a million
		// turns do not occur).
		d := float64(lastf[n]) - w
		u := float32(w)
		var k16 int16
		if !(d > -math.Pi && d < math.Pi) {
			k := float64(int64(d*invTwoPi+0.5+1<<20)) - 1<<20
			u = float32(w + twoPi*k)
			k16 = int16(k)
		}
		if k16 != turnsf[n] {
			wraps++
			turnsf[n] = k16
		}
		lastf[n] = u
		outf[n] = u
	}
	return wraps
}

// noMagnitude returns n magnitudes of +Inf, which pass every magnitude check (for
// phase-only series), cached.
func (t *thermo) noMagnitude(n int) []float32 {
	if len(t.pass) != n {
		t.pass = make([]float32, n)
		for i := range t.pass {
			t.pass[i] = float32(math.Inf(1))
		}
	}
	return t.pass
}

// toTemperature measures and removes the drift (frameDrift), converts the
// phase frames into °C and fills the counts, frame by frame while the frame
// is in cache: T = BodyTemp + (Δφ − d(x, y))/ppd.
func (t *thermo) toTemperature() {
	ppd := t.p.PhasePerDegree()
	inv := 1 / ppd
	body := t.opt.BodyTemp
	g := t.g
	sl := g.SliceLen()
	xs := normCoords(g.Cols)
	ys := normCoords(g.Rows)
	if t.opt.Drift != DriftNone {
		t.startDrift()
	}
	var zeros []float32
	if t.noise == nil {
		zeros = t.sc.f32.get(t.nv)
	}
	for f, out := range t.out.Frames {
		q := &t.out.Quality[f]
		q.Hottest = -1
		if q.Flagged {
			q.Invalid = t.nv
			continue
		}
		if t.opt.Drift != DriftNone {
			t.frameDrift(f, out)
		}
		q.Drift *= inv
		inval := 0
		var mf []float32
		if t.noise != nil {
			mf = t.mag[f]
		}
		mags := mf // the magnitudes summed for the SNR (zeros when unknown)
		if mags == nil {
			mags = zeros
		}
		var snrSum float64
		snrCnt := 0
		hot := float32(math.Inf(-1)) // the frame's hottest value, at q.Hottest
		for s := 0; s < g.Slices; s++ {
			var cf [6]float64
			if t.hasDrift != nil && t.hasDrift[f*g.Slices+s] {
				cf = t.drift[f*g.Slices+s]
			}
			var msum float64
			valid := 0
			for j := 0; j < g.Rows; j++ {
				row := s*sl + j*g.Cols
				sv := out[row : row+g.Cols]
				// d(x) = a + b·x + c·x² along the row, in °C offsets.
				y := ys[j]
				a := body - (cf[0]+cf[2]*y+cf[5]*y*y)*inv
				bb := -(cf[1] + cf[4]*y) * inv
				c := -cf[3] * inv
				rs, rv, best, at := convertRow(sv, xs, mags[row:row+g.Cols], [4]float64{inv, a, bb, c}, hot)
				msum += rs
				valid += rv
				if at >= 0 {
					hot, q.Hottest = best, row+at
				}
			}
			inval += sl - valid
			if mf != nil && t.noise[s] > 0 {
				snrSum += msum / t.noise[s]
				snrCnt += valid
			}
		}
		q.Invalid = inval
		if snrCnt > 0 {
			q.SNR = snrSum / float64(snrCnt)
		}
	}
}

// convertRow converts the unwrapped phase changes u of one row into °C in
// place, T = u·k[0] + (k[1] + x·(k[2] + x·k[3])) with x the column's
// coordinate (NaN stays NaN). It returns the sum of ms over the valid
// voxels and their number, and the hottest converted value with its
// position in the row when it exceeds hot (at = −1 otherwise; the first
// such position on ties).
func convertRow(u []float32, x []float64, ms []float32, k [4]float64, hot float32) (msum float64, valid int, best float32, at int) {
	inv, a, bb, c := k[0], k[1], k[2], k[3]
	x, ms = x[:len(u)], ms[:len(u)]
	best, at = hot, -1
	for i, w := range u {
		if w != w {
			continue
		}
		xi := x[i]
		v := float32(float64(w)*inv + (a + xi*(bb+xi*c)))
		u[i] = v
		if v > best {
			best, at = v, i
		}
		msum += float64(ms[i])
		valid++
	}
	return msum, valid, best, at
}

// motionCheck correlates frames with a fixed baseline image over every
// stride-th voxel. The baseline sample is centred once per series (b − b̄,
// with Σ(b − b̄)² = sbb), so a frame costs the sums Σa, Σa² and Σa·(b − b̄):
// r = Σa(b − b̄) / √((Σa² − (Σa)²/n)·sbb).
type motionCheck struct {
	b      []float32 // the baseline image
	stride int
	bc     []float32 // centred baseline sample; nil when it holds a NaN
	sbb    float64
}

func newMotionCheck(b []float32, stride int) motionCheck {
	mc := motionCheck{b: b, stride: stride}
	var sb float64
	n := 0
	for i := 0; i < len(b); i += stride {
		if b[i] != b[i] {
			return mc
		}
		sb += float64(b[i])
		n++
	}
	if n < 2 {
		return mc
	}
	mean := sb / float64(n)
	mc.bc = make([]float32, 0, n)
	for i := 0; i < len(b); i += stride {
		d := float64(b[i]) - mean
		mc.bc = append(mc.bc, float32(d))
		mc.sbb += float64(float32(d)) * float64(float32(d))
	}
	return mc
}

// correlation returns the Pearson correlation of a with the baseline (see
// the function correlation, which it falls back to when a holds a NaN).
func (mc *motionCheck) correlation(a []float32) float64 {
	if mc.bc == nil || len(a) != len(mc.b) {
		return correlation(a, mc.b, mc.stride)
	}
	var sa, saa, sab float64
	bc := mc.bc
	for i, q := 0, 0; i < len(a) && q < len(bc); i, q = i+mc.stride, q+1 {
		x := float64(a[i])
		sa += x
		saa += x * x
		sab += x * float64(bc[q])
	}
	if sa != sa {
		return correlation(a, mc.b, mc.stride)
	}
	fn := float64(len(bc))
	va := saa - sa*sa/fn
	if !(va > 0) || !(mc.sbb > 0) {
		return math.NaN()
	}
	return sab / math.Sqrt(va*mc.sbb)
}

// correlation returns the Pearson correlation of a and b over every
// stride-th voxel where both are finite (NaN when undefined): a regular
// sample of the whole volume, which estimates r as well as all voxels do
// for images of many thousand voxels at a fraction of the work.
func correlation(a, b []float32, stride int) float64 {
	var sa, sb, saa, sbb, sab float64
	n := 0
	b = b[:len(a)]
	for i := 0; i < len(a); i += stride {
		x, y := a[i], b[i]
		if x != x || y != y {
			continue
		}
		fx, fy := float64(x), float64(y)
		sa += fx
		sb += fy
		saa += fx * fx
		sbb += fy * fy
		sab += fx * fy
		n++
	}
	if n < 2 {
		return math.NaN()
	}
	fn := float64(n)
	cov := sab - sa*sb/fn
	va := saa - sa*sa/fn
	vb := sbb - sb*sb/fn
	if !(va > 0) || !(vb > 0) {
		return math.NaN()
	}
	return cov / math.Sqrt(va*vb)
}

func joinNote(a, b string) string {
	if a == "" {
		return b
	}
	return a + "; " + b
}

// startPeaks prepares the search for the hottest spot of the automatic
// reference: the peak phase change on the lattice of even i and j, after
// removing, frame by frame and slice by slice, a least-squares polynomial
// (order max(1, DriftOrder)) fitted to the lattice voxels with signal, so
// a drift is not taken for the hot spot (updatePeaks, per frame). The
// hottest spot is located to within a voxel.
func (t *thermo) startPeaks() {
	g := t.g
	t.lat = t.sc.b.get(t.nv) // false everywhere
	for k := 0; k < g.Slices; k++ {
		for j := 0; j < g.Rows; j += 2 {
			row := (k*g.Rows + j) * g.Cols
			for i := 0; i < g.Cols; i += 2 {
				t.lat[row+i] = !math.IsNaN(t.ref[row+i])
			}
		}
	}
	order := 1
	if t.opt.Drift == DriftPolynomial {
		order = max(1, t.opt.DriftOrder)
	}
	t.latFits = make([]*sliceFit, g.Slices)
	for s := range t.latFits {
		t.latFits[s] = newSliceFit(g, s, t.lat, nil, order, t.sc)
	}
	t.peak = t.sc.f64.get(t.nv)
}

// updatePeaks raises the lattice peaks with one unflagged frame of
// unwrapped phase changes.
func (t *thermo) updatePeaks(fr []float32) {
	g := t.g
	sl := g.SliceLen()
	for s, sf := range t.latFits {
		v := fr[s*sl : (s+1)*sl]
		cf, err := sf.fit(v)
		if err != nil {
			// Too few voxels for the polynomial: use the lattice mean.
			var sum float64
			cnt := 0
			for _, n := range sf.idx {
				if x := v[n]; x == x {
					sum += float64(x)
					cnt++
				}
			}
			cf = [6]float64{sum / float64(max(cnt, 1))}
		}
		pk := t.peak[s*sl : (s+1)*sl]
		for j := 0; j < g.Rows; j++ {
			y := sf.y[j]
			a := cf[0] + cf[2]*y + cf[5]*y*y
			b := cf[1] + cf[4]*y
			c := cf[3]
			row := j * g.Cols
			xs := sf.x[:g.Cols]
			for _, n := range sf.idx[sf.rowStart[j]:sf.rowStart[j+1]] {
				if u := v[n]; u == u {
					x := xs[int(n)-row]
					// d ≥ 0 and never NaN here: a plain comparison is max.
					if d := math.Abs(float64(u) - (a + x*(b+x*c))); d > pk[n] {
						pk[n] = d
					}
				}
			}
		}
	}
}

// referenceMask returns the drift reference region: opt.Reference, or the
// automatic region (see ThermometryOptions.Reference), restricted to voxels
// with signal.
func (t *thermo) referenceMask() []bool {
	nv := t.nv
	ref := t.sc.b.get(nv)
	if t.opt.Reference != nil {
		for n, r := range t.opt.Reference {
			ref[n] = r && !math.IsNaN(t.ref[n])
		}
		return ref
	}
	g := t.g
	cols, rows := g.Cols, g.Rows
	lat, peak := t.lat, t.peak
	best, bi, bj := -1.0, 0, 0
	// Flat indices (k·rows + j)·cols + i, as Geometry.Index, spelt out in
	// the loops.
	for k := 0; k < g.Slices; k++ {
		for j := 0; j < rows; j += 2 {
			for i := 0; i < cols; i += 2 {
				if !lat[(k*rows+j)*cols+i] {
					continue
				}
				var sum float64
				cnt := 0
				for jj := j - 2; jj <= j+2; jj += 2 {
					if jj < 0 || jj >= rows {
						continue
					}
					row := (k*rows + jj) * cols
					for ii := i - 2; ii <= i+2; ii += 2 {
						if ii >= 0 && ii < cols && lat[row+ii] {
							sum += peak[row+ii]
							cnt++
						}
					}
				}
				if m := sum / float64(cnt); m > best {
					best, bi, bj = m, i, j
				}
			}
		}
	}
	fovMin := math.Min(float64(cols)*g.Spacing[0], float64(rows)*g.Spacing[1])
	r := math.Max(20, fovMin/4)
	for k := 0; k < g.Slices; k++ {
		for j := 0; j < rows; j++ {
			dy := float64(j-bj) * g.Spacing[1]
			row := (k*rows + j) * cols
			for i := 0; i < cols; i++ {
				dx := float64(i-bi) * g.Spacing[0]
				ref[row+i] = !math.IsNaN(t.ref[row+i]) && dx*dx+dy*dy >= r*r
			}
		}
	}
	return ref
}

// startDrift selects the drift reference region and prepares its
// per-slice fits for frameDrift.
func (t *thermo) startDrift() {
	g := t.g
	t.driftRef = t.referenceMask()
	t.drift = make([][6]float64, t.nf*g.Slices)
	t.hasDrift = make([]bool, t.nf*g.Slices)
	if t.opt.Drift == DriftPolynomial {
		t.fits = make([]*sliceFit, g.Slices)
		for s := range t.fits {
			t.fits[s] = newSliceFit(g, s, t.driftRef, t.baseMag, t.opt.DriftOrder, t.sc)
		}
	}
}

// frameDrift measures the background phase drift of unflagged frame f
// (unwrapped phase changes fr), records in t.drift the polynomial
// toTemperature subtracts and in Quality.Drift its mean over the reference
// (radians here; toTemperature converts).
func (t *thermo) frameDrift(f int, fr []float32) {
	g := t.g
	sl := g.SliceLen()
	q := &t.out.Quality[f]
	if t.opt.Drift == DriftMean {
		ref := t.driftRef[:len(fr)]
		var sum float64
		cnt := 0
		for n, v := range fr {
			if ref[n] && v == v {
				sum += float64(v)
				cnt++
			}
		}
		if cnt == 0 {
			q.Note = joinNote(q.Note, "no valid reference voxels: drift not corrected")
			return
		}
		// The float32 rounding keeps the value subtracted equal to the
		// one reported.
		d := float64(float32(sum / float64(cnt)))
		for s := 0; s < g.Slices; s++ {
			t.drift[f*g.Slices+s][0] = d
			t.hasDrift[f*g.Slices+s] = true
		}
		q.Drift = d
		return
	}
	var dsum float64
	dcnt := 0
	for s, sf := range t.fits {
		v := fr[s*sl : (s+1)*sl]
		cf, err := sf.fit(v)
		if err != nil {
			q.Note = joinNote(q.Note, fmt.Sprintf("slice %d: drift not corrected: %v", s+1, err))
			continue
		}
		d, cnt := sf.driftSum(cf)
		t.drift[f*g.Slices+s] = cf
		t.hasDrift[f*g.Slices+s] = true
		dsum += d
		dcnt += cnt
	}
	if dcnt > 0 {
		q.Drift = dsum / float64(dcnt)
	}
}

// sliceFit fits and removes a weighted 2-D polynomial of the phase change
// over the reference voxels of one slice. Coordinates are normalised to
// [−1, 1] across the slice for a well-conditioned normal matrix.
type sliceFit struct {
	cols, rows int
	terms      int
	idx        []int32   // in-slice indices of the reference voxels, row by row
	rowStart   []int32   // idx[rowStart[j]:rowStart[j+1]] lie in row j
	w          []float64 // their weights
	x, y       []float64 // normalised coordinates per column and row
	chol       *mat.Cholesky
	err        error
	full       [6][6]float64 // AᵀWA over every reference voxel (upper triangle)
	nanP       []int32       // positions in idx of the NaN voxels found by the last fit
	bsum       [6]float64    // basis summed over every reference voxel (unweighted)
}

func polyTerms(order int) int { return (order + 1) * (order + 2) / 2 }

// newSliceFit prepares the fit of slice s over the voxels of ref (weighted
// by baseMag² when given); its voxel lists live in sc when sc is not nil.
func newSliceFit(g Geometry, s int, ref []bool, baseMag []float32, order int, sc *scratch) *sliceFit {
	sl := g.SliceLen()
	sf := &sliceFit{cols: g.Cols, rows: g.Rows, terms: polyTerms(order), rowStart: make([]int32, g.Rows+1)}
	if sc != nil {
		sf.idx, sf.w = sc.i32.get(sl)[:0], sc.f64.get(sl)[:0]
	}
	sf.x = normCoords(g.Cols)
	sf.y = normCoords(g.Rows)
	// One pass collects the reference voxels, the basis sums and the full
	// normal matrix AᵀWA (upper triangle).
	m := sf.terms
	var a [6][6]float64
	rs, ms := ref[s*sl:(s+1)*sl], []float32(nil)
	if baseMag != nil {
		ms = baseMag[s*sl : (s+1)*sl]
	}
	for j := 0; j < g.Rows; j++ {
		sf.rowStart[j] = int32(len(sf.idx))
		y := sf.y[j]
		for i := 0; i < g.Cols; i++ {
			n := j*g.Cols + i
			if !rs[n] {
				continue
			}
			w := 1.0
			if ms != nil {
				mg := float64(ms[n])
				w = mg * mg
			}
			if !(w > 0) {
				continue
			}
			sf.idx = append(sf.idx, int32(n))
			sf.w = append(sf.w, w)
			x := sf.x[i]
			b := [6]float64{1, x, y, x * x, x * y, y * y}
			for r := 0; r < m; r++ {
				sf.bsum[r] += b[r]
				wr := w * b[r]
				for c := r; c < m; c++ {
					a[r][c] += wr * b[c]
				}
			}
		}
	}
	sf.rowStart[g.Rows] = int32(len(sf.idx))
	sf.full = a
	sf.chol, sf.err = sf.factorMatrix(&a, len(sf.idx))
	return sf
}

func normCoords(n int) []float64 {
	c := make([]float64, n)
	h := float64(n-1) / 2
	for i := range c {
		if h > 0 {
			c[i] = (float64(i) - h) / h
		}
	}
	return c
}

// basis returns the polynomial terms 1, x, y, x², xy, y² at in-slice index n.
func (sf *sliceFit) basis(n int) [6]float64 {
	x, y := sf.x[n%sf.cols], sf.y[n/sf.cols]
	return [6]float64{1, x, y, x * x, x * y, y * y}
}

// factor builds and factorises the normal matrix AᵀWA over the reference
// voxels that are not NaN in valid (all when valid is nil). When nan lists
// the positions in idx of the NaN voxels of valid (fewer than half), the
// matrix is the full one (kept from the first call) less their terms.
func (sf *sliceFit) factor(valid []float32, nan []int32) (*mat.Cholesky, error) {
	m := sf.terms
	if len(sf.idx) < 3*m {
		return nil, fmt.Errorf("only %d reference voxels for a %d-term drift fit", len(sf.idx), m)
	}
	var a [6][6]float64
	cnt := 0
	switch {
	case valid == nil:
		for p, n := range sf.idx {
			cnt++
			sf.addTerms(&a, p, n, 1)
		}
		sf.full = a
	case nan != nil && 2*len(nan) < len(sf.idx):
		a = sf.full
		for _, p := range nan {
			sf.addTerms(&a, int(p), sf.idx[p], -1)
		}
		cnt = len(sf.idx) - len(nan)
	default:
		for p, n := range sf.idx {
			if valid[n] != valid[n] {
				continue
			}
			cnt++
			sf.addTerms(&a, p, n, 1)
		}
	}
	return sf.factorMatrix(&a, cnt)
}

// factorMatrix factorises the normal matrix a (upper triangle) built over
// cnt voxels.
func (sf *sliceFit) factorMatrix(a *[6][6]float64, cnt int) (*mat.Cholesky, error) {
	m := sf.terms
	if len(sf.idx) < 3*m {
		return nil, fmt.Errorf("only %d reference voxels for a %d-term drift fit", len(sf.idx), m)
	}
	if cnt < 3*m {
		return nil, fmt.Errorf("only %d valid reference voxels for a %d-term drift fit", cnt, m)
	}
	sym := mat.NewSymDense(m, nil)
	for r := 0; r < m; r++ {
		for c := r; c < m; c++ {
			sym.SetSym(r, c, a[r][c])
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(sym) {
		return nil, errors.New("reference voxels do not determine the drift polynomial")
	}
	return &ch, nil
}

// addTerms adds sign·w·b·bᵀ of reference voxel p (in-slice index n) to the
// upper triangle of a.
func (sf *sliceFit) addTerms(a *[6][6]float64, p int, n int32, sign float64) {
	m := sf.terms
	b := sf.basis(int(n))
	w := sign * sf.w[p]
	for r := 0; r < m; r++ {
		wr := w * b[r]
		for c := r; c < m; c++ {
			a[r][c] += wr * b[c]
		}
	}
}

// fit returns the weighted least-squares polynomial coefficients of the
// phase change v (one slice) over its valid reference voxels: the solution
// of AᵀWA·c = AᵀW·v. AᵀW·v is summed row by row (Σw·v, Σw·v·x, Σw·v·x²
// per row, then multiplied by the row's powers of y).
func (sf *sliceFit) fit(v []float32) ([6]float64, error) {
	var cf [6]float64
	var rhs [6]float64
	m := sf.terms
	anyNaN := false
	nan := sf.nanP[:0]
	for j := 0; j < sf.rows; j++ {
		lo, hi := sf.rowStart[j], sf.rowStart[j+1]
		if lo == hi {
			continue
		}
		row := j * sf.cols
		idx, w := sf.idx[lo:hi], sf.w[lo:hi]
		w = w[:len(idx)]
		xs := sf.x[:sf.cols]
		// Each sum in two parts (even and odd positions), added at the end
		// of the row, so consecutive additions do not wait for each other.
		var p0, p1, p2 [2]float64
		if m > 3 {
			for q, n := range idx {
				u := v[n]
				if u != u {
					anyNaN = true
					nan = append(nan, lo+int32(q))
					continue
				}
				wu := w[q] * float64(u)
				x := xs[int(n)-row]
				p0[q&1] += wu
				p1[q&1] += wu * x
				p2[q&1] += wu * x * x
			}
		} else {
			// Orders 0 and 1 need no Σw·v·x².
			for q, n := range idx {
				u := v[n]
				if u != u {
					anyNaN = true
					nan = append(nan, lo+int32(q))
					continue
				}
				wu := w[q] * float64(u)
				p0[q&1] += wu
				p1[q&1] += wu * xs[int(n)-row]
			}
		}
		y := sf.y[j]
		s0, s1, s2 := p0[0]+p0[1], p1[0]+p1[1], p2[0]+p2[1]
		rhs[0] += s0
		rhs[1] += s1
		rhs[2] += s0 * y
		rhs[3] += s2
		rhs[4] += s1 * y
		rhs[5] += s0 * y * y
	}
	ch, err := sf.chol, sf.err
	sf.nanP = nan
	if anyNaN {
		ch, err = sf.factor(v, nan)
	}
	if err != nil {
		return cf, err
	}
	var c mat.VecDense
	if err := ch.SolveVecTo(&c, mat.NewVecDense(m, rhs[:m])); err != nil {
		return cf, fmt.Errorf("drift fit: %w", err)
	}
	for r := 0; r < m; r++ {
		cf[r] = c.AtVec(r)
	}
	return cf, nil
}

// driftSum returns the sum of the polynomial cf over the valid reference
// voxels of the slice last passed to fit, and their number: cf·Σb, with Σb
// the basis summed over every reference voxel (newSliceFit) less the terms
// of the voxels fit found NaN.
func (sf *sliceFit) driftSum(cf [6]float64) (float64, int) {
	bs := sf.bsum
	for _, p := range sf.nanP {
		b := sf.basis(int(sf.idx[p]))
		for r := range bs {
			bs[r] -= b[r]
		}
	}
	var sum float64
	for r := 0; r < sf.terms; r++ {
		sum += cf[r] * bs[r]
	}
	return sum, len(sf.idx) - len(sf.nanP)
}

// nthSmallest returns the k-th smallest value of v (0-based), reordering v
// (Hoare's selection with a median-of-three pivot; expected linear time).
func nthSmallest[T cmp.Ordered](v []T, k int) T {
	lo, hi := 0, len(v)-1
	for lo < hi {
		mid := lo + (hi-lo)/2
		if v[mid] < v[lo] {
			v[mid], v[lo] = v[lo], v[mid]
		}
		if v[hi] < v[lo] {
			v[hi], v[lo] = v[lo], v[hi]
		}
		if v[hi] < v[mid] {
			v[hi], v[mid] = v[mid], v[hi]
		}
		pivot := v[mid]
		i, j := lo, hi
		for i <= j {
			for v[i] < pivot {
				i++
			}
			for pivot < v[j] {
				j--
			}
			if i <= j {
				v[i], v[j] = v[j], v[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return v[k]
		}
	}
	return v[k]
}

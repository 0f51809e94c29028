package sim

import (
	"fmt"
	"math"
	"time"

	"dosecover/dosemap"
)

// Ellipsoid is an axis-aligned ellipsoid in patient mm.
type Ellipsoid struct {
	Center   dosemap.Vec3 `json:"center_mm"`
	SemiAxes dosemap.Vec3 `json:"semi_axes_mm"` // along x, y, z
}

// level returns Σ((p−c)/a)²: below 1 inside, 1 on the surface.
func (e Ellipsoid) level(p dosemap.Vec3) float64 {
	d := p.Sub(e.Center)
	var s float64
	for n := 0; n < 3; n++ {
		s += d[n] * d[n] / (e.SemiAxes[n] * e.SemiAxes[n])
	}
	return s
}

// Contains reports whether p lies inside e.
func (e Ellipsoid) Contains(p dosemap.Vec3) bool { return e.level(p) <= 1 }

// Grown returns e with every semi-axis lengthened by m mm — the margin
// region used for spill (an approximation of the true offset surface that
// is exact on the axes).
func (e Ellipsoid) Grown(m float64) Ellipsoid {
	return Ellipsoid{Center: e.Center, SemiAxes: e.SemiAxes.Add(dosemap.Vec3{m, m, m})}
}

// Tube is a cylinder parallel to the z axis (patient superior–inferior).
type Tube struct {
	Center dosemap.Vec3 `json:"center_mm"` // a point on the axis
	Radius float64      `json:"radius_mm"`
}

// Contains reports whether p lies inside t.
func (t Tube) Contains(p dosemap.Vec3) bool {
	dx, dy := p[0]-t.Center[0], p[1]-t.Center[1]
	return dx*dx+dy*dy <= t.Radius*t.Radius
}

// Phantom is the imaged object: a gel cylinder along z holding a lesion
// (the target) and a tube to be spared (the avoid structure).
type Phantom struct {
	Center   dosemap.Vec3 `json:"center_mm"` // a point on the cylinder axis
	Radius   float64      `json:"radius_mm"`
	Tissue   Tissue       `json:"tissue"`
	BodyTemp float64      `json:"base_temperature_c"` // initial, boundary and arterial temperature, °C
	Lesion   Ellipsoid    `json:"lesion"`
	Avoid    Tube         `json:"avoid"`
}

// SonicationSpec is one delivered sonication.
type SonicationSpec struct {
	Planned  int          // 1-based planned spot it was aimed at; 0 for none
	Focus    dosemap.Vec3 // where the focus actually was, patient mm
	Power    float64      // absorbed power, W
	Duration float64      // heating time, s
	Cooling  float64      // unimaged cooling after the series, s, before the next sonication
	Spill    bool         // the focus landed beyond the margin (scenario truth)
}

// Motion shifts the object in one thermometry frame.
type Motion struct {
	Sonication int          `json:"sonication"` // 1-based
	Frame      int          `json:"frame"`      // 1-based TemporalPositionIdentifier
	Shift      dosemap.Vec3 `json:"shift_mm"`   // displacement of the object, mm
}

// Protocol is the thermometry acquisition.
type Protocol struct {
	Cols, Rows, Slices int
	PixelSpacing       float64      // in-plane, mm
	SliceThickness     float64      // mm; slices are contiguous
	Center             dosemap.Vec3 // centre of the slab, patient mm
	FrameInterval      float64      // s between frames
	Frames             int          // per sonication
	BaselineFrames     int          // frames before heating starts
	B0                 float64      // T
	TE                 float64      // s
	TR                 float64      // s
	FlipAngle          float64      // degrees
	Alpha              float64      // PRF coefficient, ppm/°C (negative)
	Sign               float64      // +1 or -1: sign convention of the stored phase
	SNR                float64      // magnitude SNR in the gel
	DriftRate          float64      // uniform phase drift, rad/s
	DriftGradient      float64      // drift varying along x, rad/s per 100 mm
	BeamDirection      dosemap.Vec3 // propagation direction of the ultrasound beam
	SigmaAxial         float64      // focal spot σ along the beam, mm
	SigmaLateral       float64      // focal spot σ across the beam, mm
}

// gyromagnetic ratio of the proton, rad s^-1 T^-1 (CODATA 2014:
// γ/2π = 42.57747892 MHz/T).
const gamma = 2 * math.Pi * 42.57747892e6

// PhasePerDegree returns the phase change per °C of the stored phase,
// Sign·γ·α·B0·TE in rad/°C (PRF shift; Ishihara et al., MRM 1995;34:814).
func (p Protocol) PhasePerDegree() float64 {
	return p.Sign * gamma * p.Alpha * 1e-6 * p.B0 * p.TE
}

// AnatomyProtocol is the anatomy acquisition (T2-like contrast).
type AnatomyProtocol struct {
	Cols, Rows, Slices int
	PixelSpacing       float64
	SliceThickness     float64
	Center             dosemap.Vec3
}

// Session describes everything needed to simulate and write one treatment
// session.
type Session struct {
	Label       string
	Description string // free-text scenario, copied into truth.json
	PatientName string // fictitious
	PatientID   string
	Seed        uint64
	Start       time.Time // start of the first thermometry series
	Phantom     Phantom
	Planned     []dosemap.Vec3 // planned focal positions
	Sonications []SonicationSpec
	Motion      []Motion
	Thermometry Protocol
	Anatomy     AnatomyProtocol
	SimSpacing  float64 // bioheat grid spacing, mm
	SimMaxStep  float64 // s; 0 means the stability limit
	MarginMM    float64 // safety margin around the target used for the spill truth
	Layout      Layout  // placement of the thermometry planes; LayoutSlab by default
	Threshold   float64 // lethal dose, CEM43 minutes, used for the hole and spill truth
	// SliceTruth adds to the truth the doses of the continuous temperature
	// averaged across one thermometry slice (Truth.SliceDose,
	// Truth.SliceChangeDose): what thermometry of that slice thickness
	// sees at best. Axial slabs only (LayoutSlab, LayoutMovingSlab); it
	// costs about a third more simulation time.
	SliceTruth bool
}

// ThermometryGeometry returns the grid of the thermometry slices: axial,
// centred on Protocol.Center.
func (s *Session) ThermometryGeometry() dosemap.Geometry {
	p := s.Thermometry
	sp := dosemap.Vec3{p.PixelSpacing, p.PixelSpacing, p.SliceThickness}
	return centredAxial(p.Cols, p.Rows, p.Slices, sp, p.Center)
}

// AnatomyGeometry returns the grid of the anatomy series.
func (s *Session) AnatomyGeometry() dosemap.Geometry {
	a := s.Anatomy
	sp := dosemap.Vec3{a.PixelSpacing, a.PixelSpacing, a.SliceThickness}
	return centredAxial(a.Cols, a.Rows, a.Slices, sp, a.Center)
}

func centredAxial(c, r, k int, sp, centre dosemap.Vec3) dosemap.Geometry {
	o := centre.Sub(dosemap.Vec3{float64(c-1) / 2 * sp[0], float64(r-1) / 2 * sp[1], float64(k-1) / 2 * sp[2]})
	return dosemap.NewAxialGeometry(c, r, k, sp, o)
}

// Validate reports the first inconsistency in s.
func (s *Session) Validate() error {
	p := s.Thermometry
	switch {
	case len(s.Sonications) == 0:
		return fmt.Errorf("session %q has no sonications", s.Label)
	case p.Cols < 8 || p.Rows < 8 || p.Slices < 1 || p.Frames < 2:
		return fmt.Errorf("session %q: thermometry %d×%d×%d with %d frames is too small", s.Label, p.Cols, p.Rows, p.Slices, p.Frames)
	case p.BaselineFrames < 1 || p.BaselineFrames >= p.Frames:
		return fmt.Errorf("session %q: %d baseline frames of %d", s.Label, p.BaselineFrames, p.Frames)
	case !(p.FrameInterval > 0) || !(p.B0 > 0) || !(p.TE > 0) || !(p.SNR > 0):
		return fmt.Errorf("session %q: frame interval, B0, TE and SNR must be positive", s.Label)
	case !(s.SimSpacing > 0):
		return fmt.Errorf("session %q: bioheat grid spacing must be positive", s.Label)
	case s.Anatomy.Cols < 8 || s.Anatomy.Rows < 8 || s.Anatomy.Slices < 1:
		return fmt.Errorf("session %q: anatomy grid too small", s.Label)
	}
	if err := s.Phantom.Tissue.Validate(); err != nil {
		return fmt.Errorf("session %q: %w", s.Label, err)
	}
	for n, so := range s.Sonications {
		if so.Planned < 0 || so.Planned > len(s.Planned) {
			return fmt.Errorf("session %q: sonication %d refers to planned spot %d of %d", s.Label, n+1, so.Planned, len(s.Planned))
		}
		if so.Duration <= 0 || so.Duration > float64(p.Frames-p.BaselineFrames)*p.FrameInterval {
			return fmt.Errorf("session %q: sonication %d lasts %g s, outside the %d imaged frames", s.Label, n+1, so.Duration, p.Frames)
		}
	}
	for _, m := range s.Motion {
		if m.Sonication < 1 || m.Sonication > len(s.Sonications) || m.Frame < 1 || m.Frame > p.Frames {
			return fmt.Errorf("session %q: motion at sonication %d frame %d is outside the session", s.Label, m.Sonication, m.Frame)
		}
	}
	return nil
}

// simResult holds what the bioheat run produced.
type simResult struct {
	grid   dosemap.Geometry
	frames [][][]float32   // [sonication][frame] temperature rise over base on the first stack's grid
	stacks [][][][]float32 // [sonication][stack][frame] temperature rise on each stack's grid (StackGeometries)
	peak   []float64       // hottest simulated voxel per sonication, °C
	before []float64       // temperature at the focus when each sonication started, °C
	dose   []float64       // cumulative CEM43 on the bioheat grid
	// change is the CEM43 an ideal thermometry would measure at every
	// bioheat voxel: each sonication's temperature change over its
	// baseline frames, added to the base temperature, accumulated from its
	// last baseline frame to its last imaged frame.
	change []float64
	// sliceDose and sliceChange are dose and change with the temperature
	// averaged across one thermometry slice (Session.SliceTruth); nil
	// without.
	sliceDose, sliceChange []float64
}

// simulationGrid returns a bioheat grid covering every focal spot with room
// for the heat to spread: 3σ beyond the spots' extent plus 10 mm, which
// keeps the held boundary far from any temperature rise.
func (s *Session) simulationGrid() dosemap.Geometry {
	p := s.Thermometry
	lo := dosemap.Vec3{math.Inf(1), math.Inf(1), math.Inf(1)}
	hi := lo.Scale(-1)
	add := func(q dosemap.Vec3) {
		for n := 0; n < 3; n++ {
			lo[n] = math.Min(lo[n], q[n])
			hi[n] = math.Max(hi[n], q[n])
		}
	}
	for _, so := range s.Sonications {
		add(so.Focus)
	}
	l := s.Phantom.Lesion
	add(l.Center.Sub(l.SemiAxes))
	add(l.Center.Add(l.SemiAxes))
	d := p.BeamDirection.Unit()
	for n := 0; n < 3; n++ {
		ext := math.Hypot(d[n]*3*p.SigmaAxial, 3*p.SigmaLateral) + 10
		lo[n] -= ext
		hi[n] += ext
	}
	h := s.SimSpacing
	var size [3]int
	for n := 0; n < 3; n++ {
		size[n] = int(math.Ceil((hi[n]-lo[n])/h)) + 1
	}
	return dosemap.NewAxialGeometry(size[0], size[1], size[2], dosemap.Vec3{h, h, h}, lo)
}

// simulate runs the bioheat equation through every sonication and samples
// the temperature rise on the thermometry grid at each frame time.
func (s *Session) simulate() (*simResult, error) {
	p := s.Thermometry
	g := s.simulationGrid()
	b, err := NewBioheat(g, s.Phantom.Tissue, s.Phantom.BodyTemp)
	if err != nil {
		return nil, err
	}
	res := &simResult{grid: g, dose: make([]float64, g.Len()), change: make([]float64, g.Len())}
	var sa *sliceAverager
	if s.SliceTruth {
		if s.Layout != LayoutSlab && s.Layout != LayoutMovingSlab {
			return nil, fmt.Errorf("slice-averaged truth: layout %s has no axial slab", s.Layout)
		}
		sa = newSliceAverager(g, p.SliceThickness)
		res.sliceDose, res.sliceChange = make([]float64, g.Len()), make([]float64, g.Len())
	}
	baseline := make([]float64, g.Len())
	q := make([]float64, g.Len())
	samplers := map[string]*slabSampler{}
	heatStart := (float64(p.BaselineFrames) - 0.5) * p.FrameInterval
	maxStep := b.StableStep()
	if s.SimMaxStep > 0 && s.SimMaxStep < maxStep {
		maxStep = s.SimMaxStep
	}
	for n, so := range s.Sonications {
		var ss []*slabSampler
		for _, sg := range s.StackGeometries(n) {
			key := fmt.Sprint(sg)
			if samplers[key] == nil {
				if len(samplers) > 8 {
					clear(samplers) // planes that move: keep a few
				}
				samplers[key] = newSlabSampler(g, sg)
			}
			ss = append(ss, samplers[key])
		}
		stacks := make([][][]float32, len(ss))
		for i := range q {
			q[i] = 0
		}
		FocalSpot{Center: so.Focus, Direction: p.BeamDirection, Power: so.Power,
			SigmaAxial: p.SigmaAxial, SigmaLateral: p.SigmaLateral}.Deposit(g, q)
		fi, fj, fk := g.Voxel(so.Focus)
		res.before = append(res.before, b.T[g.Index(int(math.Round(fi)), int(math.Round(fj)), int(math.Round(fk)))])
		// Events: frame times and the two heating edges, in series time.
		t := 0.0
		peak := s.Phantom.BodyTemp
		var frames [][]float32
		heatEnd := heatStart + so.Duration
		imaged := false // between the last baseline frame and the last frame
		advance := func(to float64) {
			d := to - t
			if d <= 1e-9 {
				return
			}
			var src []float64
			if t >= heatStart-1e-9 && t < heatEnd-1e-9 {
				src = q
			}
			steps := int(math.Ceil(d/maxStep - 1e-9))
			dt := d / float64(steps)
			for range steps {
				b.Step(dt, src)
				accumulateDose(res.dose, b.T, dt)
				if imaged {
					accumulateChange(res.change, b.T, baseline, s.Phantom.BodyTemp, dt)
				}
				if sa != nil {
					sa.accumulate(res.sliceDose, res.sliceChange, b.T, s.Phantom.BodyTemp, dt, imaged)
				}
			}
			t = to
		}
		for f := 0; f < p.Frames; f++ {
			ft := float64(f) * p.FrameInterval
			for _, edge := range []float64{heatStart, heatEnd} {
				if edge > t && edge < ft {
					advance(edge)
				}
			}
			advance(ft)
			if f < p.BaselineFrames {
				for i, v := range b.T {
					baseline[i] = (baseline[i]*float64(f) + v) / float64(f+1)
				}
				if sa != nil {
					for i, v := range sa.average(b.T) {
						sa.baseline[i] = (sa.baseline[i]*float64(f) + v) / float64(f+1)
					}
				}
			}
			imaged = f >= p.BaselineFrames-1 && f < p.Frames-1
			for a, sp := range ss {
				stacks[a] = append(stacks[a], sp.rise(b.T, s.Phantom.BodyTemp))
			}
			frames = stacks[0]
			for _, v := range b.T {
				if v > peak {
					peak = v
				}
			}
		}
		advance(math.Max(heatEnd, t)) // heating that outlasts the imaged frames
		advance(t + so.Cooling)
		res.frames = append(res.frames, frames)
		res.stacks = append(res.stacks, stacks)
		res.peak = append(res.peak, peak)
	}
	return res, nil
}

// accumulateDose adds the CEM43 of holding temperature T for dt seconds
// (Sapareto & Dewey 1984: CEM43 = Σ R^(43−T) Δt/60, R = 0.5 at or above
// 43 °C and 0.25 below). Voxels below 39 °C add less than 1/256 CEM43 per
// minute and are skipped. It is called after every bioheat step (rectangle
// rule at the step's end temperature).
func accumulateDose(dose, T []float64, dt float64) {
	m := dt / 60
	for n, v := range T {
		if v < 39 {
			continue
		}
		if v >= 43 {
			dose[n] += m * math.Exp2(v-43)
		} else {
			dose[n] += m * math.Exp2(-2*(43-v))
		}
	}
}

// accumulateChange adds the CEM43 of holding base + T − baseline for dt
// seconds (as accumulateDose).
func accumulateChange(dose, T, baseline []float64, base, dt float64) {
	m := dt / 60
	for n, v := range T {
		v = base + v - baseline[n]
		if v < 39 {
			continue
		}
		if v >= 43 {
			dose[n] += m * math.Exp2(v-43)
		} else {
			dose[n] += m * math.Exp2(-2*(43-v))
		}
	}
}

// sliceAverager averages the bioheat temperature across an axial slice of
// the thermometry around every bioheat voxel, as slabSampler does for the
// thermometry voxels (three points across the slice thickness, linear
// interpolation along z between bioheat voxels; clamped at the grid's
// top and bottom, where the temperature is held at the base).
type sliceAverager struct {
	g        dosemap.Geometry
	k0       [2][]int32 // per slice: lower bioheat slice of the point above (0) and below (1)
	w        [2][]float64
	out      []float64
	baseline []float64 // averaged temperature at the baseline frames
}

func newSliceAverager(g dosemap.Geometry, thickness float64) *sliceAverager {
	a := &sliceAverager{g: g, out: make([]float64, g.Len()), baseline: make([]float64, g.Len())}
	o := thickness / 3 / g.Spacing[2] // offset of the outer points, bioheat slices
	for s := 0; s < 2; s++ {
		a.k0[s] = make([]int32, g.Slices)
		a.w[s] = make([]float64, g.Slices)
	}
	for k := 0; k < g.Slices; k++ {
		for s, z := range [2]float64{float64(k) + o, float64(k) - o} {
			z = math.Max(0, math.Min(float64(g.Slices-1), z))
			z0 := min(int(z), g.Slices-2)
			a.k0[s][k], a.w[s][k] = int32(z0), z-float64(z0)
		}
	}
	return a
}

// cem43Rate is the CEM43 per minute at temperature v (Sapareto & Dewey 1984,
// as accumulateDose).
func cem43Rate(v float64) float64 {
	if v >= 43 {
		return math.Exp2(v - 43)
	}
	return math.Exp2(-2 * (43 - v))
}

// accumulate adds to dose (and, when imaged, to change, over the averaged
// baseline) the CEM43 of holding the averaged T for dt seconds, as
// accumulateDose and accumulateChange do.
func (a *sliceAverager) accumulate(dose, change, T []float64, base, dt float64, imaged bool) {
	m := dt / 60
	for n, v := range a.average(T) {
		if v < 39 { // the change over a baseline at or above base is no larger
			continue
		}
		dose[n] += m * cem43Rate(v)
		if c := base + v - a.baseline[n]; imaged && c >= 39 {
			change[n] += m * cem43Rate(c)
		}
	}
}

// average returns T averaged across the slice around every voxel (the
// result is reused by the next call).
func (a *sliceAverager) average(T []float64) []float64 {
	sl := a.g.SliceLen()
	for k := 0; k < a.g.Slices; k++ {
		lo0, w0 := int(a.k0[0][k])*sl, a.w[0][k]
		lo1, w1 := int(a.k0[1][k])*sl, a.w[1][k]
		base := k * sl
		for n := 0; n < sl; n++ {
			up := (1-w0)*T[lo0+n] + w0*T[lo0+sl+n]
			down := (1-w1)*T[lo1+n] + w1*T[lo1+sl+n]
			a.out[base+n] = (T[base+n] + up + down) / 3
		}
	}
	return a.out
}

// slabSampler averages the bioheat temperature over each thermometry voxel
// (three points across the slice thickness, one per in-plane centre,
// trilinear interpolation): the partial-volume effect of thick slices. The
// interpolation weights are computed once.
type slabSampler struct {
	dst dosemap.Geometry
	vox []int32   // thermometry voxel of each term
	src []int32   // bioheat voxel of each term
	w   []float32 // weight of each term
}

func newSlabSampler(src, dst dosemap.Geometry) *slabSampler {
	s := &slabSampler{dst: dst}
	for n := 0; n < dst.Len(); n++ {
		i, j, k := dst.IJK(n)
		type term struct {
			idx int
			w   float64
		}
		var terms []term
		ok := true
		for _, dk := range []float64{-1.0 / 3, 0, 1.0 / 3} {
			a, b, c := src.Voxel(dst.Point(float64(i), float64(j), float64(k)+dk))
			if !(a >= 0 && b >= 0 && c >= 0 && a < float64(src.Cols-1) && b < float64(src.Rows-1) && c < float64(src.Slices-1)) {
				ok = false
				break
			}
			i0, j0, k0 := int(a), int(b), int(c)
			fx, fy, fz := a-float64(i0), b-float64(j0), c-float64(k0)
			for d := 0; d < 8; d++ {
				wx, wy, wz := 1-fx, 1-fy, 1-fz
				di, dj, dk := d&1, d>>1&1, d>>2&1
				if di == 1 {
					wx = fx
				}
				if dj == 1 {
					wy = fy
				}
				if dk == 1 {
					wz = fz
				}
				if w := wx * wy * wz / 3; w > 0 {
					terms = append(terms, term{src.Index(i0+di, j0+dj, k0+dk), w})
				}
			}
		}
		if !ok {
			continue // outside the bioheat grid: no temperature rise
		}
		for _, t := range terms {
			s.vox = append(s.vox, int32(n))
			s.src = append(s.src, int32(t.idx))
			s.w = append(s.w, float32(t.w))
		}
	}
	return s
}

// rise returns T − base averaged over each thermometry voxel.
func (s *slabSampler) rise(T []float64, base float64) []float32 {
	out := make([]float32, s.dst.Len())
	acc := make([]float64, s.dst.Len())
	for t, v := range s.vox {
		acc[v] += float64(s.w[t]) * (T[s.src[t]] - base)
	}
	for n, x := range acc {
		out[n] = float32(x)
	}
	return out
}

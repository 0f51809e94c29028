package dosemap

import (
	"errors"
	"fmt"
	"math"
)

// TimeRule selects how a dose model integrates a rate over the irregular
// frame times of a temperature series.
type TimeRule int

// Time rules. The zero value is RuleTrapezoid, the default.
const (
	// RuleTrapezoid integrates each interval between consecutive frames with
	// the trapezoid rule, ½·(f(T_{i−1}) + f(T_i))·(t_i − t_{i−1}). It is
	// second-order accurate in the frame interval and treats heating and
	// cooling alike, so it is the default. An interval counts only when
	// both of its frames are valid.
	RuleTrapezoid TimeRule = iota
	// RuleRectangle holds each frame's temperature over the interval that
	// ends at it, f(T_i)·(t_i − t_{i−1}) — what a monitor accumulates as
	// each frame arrives. The first frame contributes nothing. It is
	// first-order accurate: it overestimates on heating ramps and
	// underestimates on cooling.
	RuleRectangle
)

// String returns "trapezoid" or "rectangle".
func (r TimeRule) String() string {
	if r == RuleRectangle {
		return "rectangle"
	}
	return "trapezoid"
}

// ParseTimeRule returns the rule named "trapezoid" or "rectangle".
func ParseTimeRule(name string) (TimeRule, error) {
	switch name {
	case "trapezoid":
		return RuleTrapezoid, nil
	case "rectangle":
		return RuleRectangle, nil
	}
	return 0, fmt.Errorf("time rule %q: want trapezoid or rectangle", name)
}

// MarshalText writes the rule by name (JSON: "trapezoid" or "rectangle").
func (r TimeRule) MarshalText() ([]byte, error) {
	if r != RuleTrapezoid && r != RuleRectangle {
		return nil, fmt.Errorf("time rule %d is not a rule", int(r))
	}
	return []byte(r.String()), nil
}

// UnmarshalText reads a rule written by MarshalText.
func (r *TimeRule) UnmarshalText(b []byte) error {
	v, err := ParseTimeRule(string(b))
	if err == nil {
		*r = v
	}
	return err
}

// DoseMap is a thermal-dose volume. NaN marks a voxel that no valid
// interval of thermometry covered ("not monitored").
type DoseMap struct {
	Volume
	Unit    string   // "CEM43" (minutes at 43 °C) or "Omega"
	Missing []uint16 // per voxel, frames that were NaN (saturating); nil if none anywhere
}

// DoseModel turns a temperature series into a dose map.
type DoseModel interface {
	Name() string              // short name for display, e.g. "CEM43"
	Unit() string              // unit of the dose, e.g. "CEM43"
	DefaultThreshold() float64 // lethal dose commonly used with the model
	Dose(ts *TemperatureSeries) *DoseMap
}

// rateModel is implemented by the models of this package: it writes the
// dose rate per unit of time-integration (per minute or per second) for a
// run of temperatures, NaN for NaN, and gives the factor that converts
// seconds into that time unit.
type rateModel interface {
	rates(T []float32, f []float64)
	perSecond() float64
	rule() TimeRule
	DoseModel
}

// CEM43 is the cumulative-equivalent-minutes-at-43 °C model of Sapareto and
// Dewey (Int J Radiat Oncol Biol Phys 1984;10(6):787–800):
//
//	CEM43 = Σ R^(43 − T) · Δt,  Δt in minutes,
//	R = RAbove for T ≥ Break, RBelow for T < Break.
//
// The zero value and DefaultCEM43 use Break 43 °C, RAbove 0.5, RBelow 0.25
// and the trapezoid rule; a zero field takes its default. With a Break other
// than 43 °C the rate is discontinuous at Break, as in the papers that use
// such a break.
type CEM43 struct {
	Break  float64  `json:"break_c"` // °C where R changes
	RAbove float64  `json:"r_above"` // R at or above Break
	RBelow float64  `json:"r_below"` // R below Break
	Rule   TimeRule `json:"rule"`
}

// DefaultCEM43 returns the Sapareto–Dewey model: break 43 °C, R = 0.5
// above, 0.25 below, trapezoid rule.
func DefaultCEM43() CEM43 { return CEM43{Break: 43, RAbove: 0.5, RBelow: 0.25, Rule: RuleTrapezoid} }

func (c CEM43) withDefaults() CEM43 {
	d := DefaultCEM43()
	if c.Break == 0 {
		c.Break = d.Break
	}
	if c.RAbove == 0 {
		c.RAbove = d.RAbove
	}
	if c.RBelow == 0 {
		c.RBelow = d.RBelow
	}
	return c
}

// Name returns "CEM43".
func (CEM43) Name() string { return "CEM43" }

// Unit returns "CEM43" (equivalent minutes at 43 °C).
func (CEM43) Unit() string { return "CEM43" }

// DefaultThreshold returns 240 CEM43, the lethal dose most often used
// (Sapareto & Dewey 1984; McDannold et al., Radiology 2006). Thresholds vary
// by tissue.
func (CEM43) DefaultThreshold() float64 { return 240 }

// Rate returns R^(43 − T), the equivalent minutes at 43 °C per minute at T.
func (c CEM43) Rate(T float64) float64 {
	c = c.withDefaults()
	r := c.RBelow
	if T >= c.Break {
		r = c.RAbove
	}
	return math.Pow(r, 43-T)
}

func (c CEM43) perSecond() float64 { return 1.0 / 60 }
func (c CEM43) rule() TimeRule     { return c.Rule }

// rates uses R^(43−T) = 2^((T−43)·(−log2 R)) with a fast exp2.
func (c CEM43) rates(T []float32, f []float64) {
	c = c.withDefaults()
	cemRates(T, f, c.Break, -math.Log2(c.RAbove), -math.Log2(c.RBelow))
}

// cemRates writes f[n] = 2^(e·(T[n] − 43)), e = la where T[n] ≥ brk and lb
// elsewhere (NaN for NaN): by the vector kernel where the processor has
// one (cemRatesAVX2), otherwise and for the lanes the kernel leaves by
// exp2.
func cemRates(T []float32, f []float64, brk, la, lb float64) {
	f = f[:len(T)]
	m := 0
	if vectorKernels {
		m = len(T) &^ 3
		if m > 0 && cemRatesAVX2(&T[0], &f[0], m, brk, la, lb) < m {
			m = 0 // some exponent out of the kernel's range: all again
		}
	}
	for n, t := range T[m:] {
		x := float64(t)
		if x != x {
			f[m+n] = x
			continue
		}
		e := lb
		if x >= brk {
			e = la
		}
		f[m+n] = exp2(e * (x - 43))
	}
}

// Dose returns the CEM43 map of ts; see RuleTrapezoid and RuleRectangle.
func (c CEM43) Dose(ts *TemperatureSeries) *DoseMap { return integrate(c, ts) }

// GasConstant is the molar gas constant R in J mol⁻¹ K⁻¹ (CODATA 2018,
// exact).
const GasConstant = 8.314462618

// ZeroCelsius is 0 °C in kelvin.
const ZeroCelsius = 273.15

// Arrhenius is the damage-integral model of Henriques and Moritz (Am J
// Pathol 1947;23:531–549):
//
//	Ω = A · ∫ exp(−Ea / (R·T(t))) dt,  T in kelvin, t in seconds,
//
// with Ω ≥ 1 taken as lethal. A is the frequency factor (s⁻¹), Ea the
// activation energy (J/mol). The parameter sets in ArrheniusSets are tissue
// specific; choose the one your protocol uses.
type Arrhenius struct {
	Tissue string   `json:"tissue"`       // parameter set, for display
	A      float64  `json:"a_per_s"`      // frequency factor, s⁻¹
	Ea     float64  `json:"ea_j_per_mol"` // activation energy, J/mol
	Rule   TimeRule `json:"rule"`
	Source string   `json:"source"` // where A and Ea come from
}

// ArrheniusSets lists Arrhenius parameter sets. The values are given as
// commonly quoted; they were not checked against the original texts.
var ArrheniusSets = []Arrhenius{
	{Tissue: "skin", A: 3.1e98, Ea: 6.28e5, Source: "Henriques & Moritz, Am J Pathol 1947 (porcine skin); values as commonly quoted"},
	{Tissue: "liver", A: 7.39e39, Ea: 2.577e5, Source: "liver coagulation parameters as commonly quoted in the ablation literature; not checked against the original text"},
}

// DefaultArrhenius returns the first entry of ArrheniusSets (Henriques and
// Moritz's skin parameters) with the trapezoid rule.
func DefaultArrhenius() Arrhenius { return ArrheniusSets[0] }

// ArrheniusSet returns the entry of ArrheniusSets for the given tissue.
func ArrheniusSet(tissue string) (Arrhenius, bool) {
	for _, a := range ArrheniusSets {
		if a.Tissue == tissue {
			return a, true
		}
	}
	return Arrhenius{}, false
}

// Name returns "Arrhenius" followed by the parameter set's tissue.
func (a Arrhenius) Name() string {
	if a.Tissue == "" {
		return "Arrhenius"
	}
	return "Arrhenius (" + a.Tissue + ")"
}

// Unit returns "Omega" (the dimensionless damage integral).
func (Arrhenius) Unit() string { return "Omega" }

// DefaultThreshold returns 1: Ω = 1 is the conventional lethal damage
// (Henriques & Moritz 1947).
func (Arrhenius) DefaultThreshold() float64 { return 1 }

// Rate returns A·exp(−Ea/(R·T)) in s⁻¹ for T in °C.
func (a Arrhenius) Rate(T float64) float64 {
	return math.Exp(math.Log(a.A) - a.Ea/(GasConstant*(T+ZeroCelsius)))
}

func (a Arrhenius) perSecond() float64 { return 1 }
func (a Arrhenius) rule() TimeRule     { return a.Rule }

func (a Arrhenius) rates(T []float32, f []float64) {
	lnA := math.Log(a.A) * math.Log2E
	k := a.Ea / GasConstant * math.Log2E
	f = f[:len(T)]
	for n, t := range T {
		x := float64(t)
		if x != x {
			f[n] = math.NaN()
			continue
		}
		f[n] = exp2(lnA - k/(x+ZeroCelsius))
	}
}

// Dose returns the damage integral Ω of ts.
func (a Arrhenius) Dose(ts *TemperatureSeries) *DoseMap { return integrate(a, ts) }

// exp2Table256 holds 2^(j/256), j = 0..255 (the dose loop's table).
var exp2Table256 = func() (t [256]float64) {
	for j := range t {
		t[j] = math.Exp2(float64(j) / 256)
	}
	return t
}()

// exp2Table holds 2^(j/64), j = 0..63.
var exp2Table = func() (t [64]float64) {
	for j := range t {
		t[j] = math.Exp2(float64(j) / 64)
	}
	return t
}()

// exp2 returns 2^x for the dose rates, several times faster than
// math.Exp2: x = n + j/64 + r with |r| ≤ 1/128, 2^x = 2^n · 2^(j/64) · 2^r,
// the middle factor from a table and 2^r from a degree-4 Taylor polynomial
// (relative error below 1e-13). Results below 2^−1022 are returned as 0.
func exp2(x float64) float64 {
	if !(x > -1022) {
		if x != x {
			return x
		}
		return 0
	}
	if !(x < 1023) {
		return math.Exp2(x)
	}
	const magic = 0x1.8p52 // adding it rounds to an integer held in the low mantissa bits
	t := x*64 + magic
	k := int64(math.Float64bits(t)) - int64(math.Float64bits(magic)) // round(64x)
	r := (x - (t-magic)/64) * math.Ln2
	p := 1 + r*(1+r*(1.0/2+r*(1.0/6+r*(1.0/24))))
	return math.Float64frombits(uint64((k>>6)+1023)<<52) * exp2Table[k&63] * p
}

// chunk is the number of voxels processed at a time, so the rate buffer
// and the running sums stay in the first-level cache.
const chunk = 1024

// accumulator integrates a rate model frame by frame over a set of voxels.
// The dose of consecutive series adds up; start begins a new series.
type accumulator struct {
	m       rateModel
	trap    bool
	cem     bool    // m is CEM43: brk, la, lb are its break and −log2 R
	brk     float64 // above and below
	la, lb  float64
	acc     []float64
	prev    []float64
	missing []uint32
	got     []bool
	buf     [chunk]float64
	lastT   float64
	frames  int
}

// newAccumulator returns an accumulator for n voxels; its buffers live in
// sc when sc is not nil.
func newAccumulator(m rateModel, n int, sc *scratch) *accumulator {
	a := &accumulator{m: m, trap: m.rule() != RuleRectangle}
	if sc != nil {
		a.acc, a.prev, a.missing, a.got = sc.f64.get(n), sc.f64.get(n), sc.u32.get(n), sc.b.get(n)
	} else {
		a.acc, a.prev, a.missing, a.got = make([]float64, n), make([]float64, n), make([]uint32, n), make([]bool, n)
	}
	if c, ok := m.(CEM43); ok {
		c = c.withDefaults()
		a.cem, a.brk, a.la, a.lb = true, c.Break, -math.Log2(c.RAbove), -math.Log2(c.RBelow)
	}
	return a
}

// cemTrapezoid is addChunk for CEM43 and the trapezoid rule with the rate
// computed inline (the default model: the hot loop of dose review, where
// the processor has no vector kernels; with them the general path of
// addChunk is faster).
func (a *accumulator) cemTrapezoid(T []float32, lo int, w float64) {
	hi := lo + len(T)
	acc := a.acc[lo:hi:hi]
	prev := a.prev[lo:hi:hi]
	got := a.got[lo:hi:hi]
	miss := a.missing[lo:hi:hi]
	acc, prev, got, miss = acc[:len(T)], prev[:len(T)], got[:len(T)], miss[:len(T)]
	h := 0.5 * w
	brk, la, lb := a.brk, a.la, a.lb
	for n, t := range T {
		x := float64(t)
		if x != x {
			prev[n] = x
			miss[n]++
			continue
		}
		e := lb
		if x >= brk {
			e = la
		}
		y := e * (x - 43)
		var f float64
		if y > -1022 && y < 1023 {
			// exp2 with a finer table and a shorter polynomial: x = n +
			// j/256 + r, |r| ≤ 1/512, 2^r by its Taylor polynomial of
			// degree 3 (relative error below (ln2/512)⁴/24 ≈ 1.4e-13).
			const magic = 0x1.8p52
			t := y*256 + magic
			k := int64(math.Float64bits(t)) - int64(math.Float64bits(magic))
			r := (y - (t-magic)*(1.0/256)) * math.Ln2
			p := 1 + r*(1+r*(1.0/2+r*(1.0/6)))
			f = math.Float64frombits(uint64((k>>8)+1023)<<52) * exp2Table256[k&255] * p
		} else {
			f = exp2(y)
		}
		s := prev[n] + f
		prev[n] = f
		if s == s {
			acc[n] += h * s
			got[n] = true
		}
	}
}

// trapezoid adds the trapezoid-rule term h·(prev + f) of the rates f to
// acc where both are valid (setting got), counts the NaN rates in miss and
// makes f the new prev. Where the processor has the vector kernel
// (trapezoidAVX2) it takes blocks of four voxels, to the same values.
func trapezoid(f, acc, prev []float64, got []bool, miss []uint32, h float64) {
	acc, prev, got, miss = acc[:len(f)], prev[:len(f)], got[:len(f)], miss[:len(f)]
	if vectorKernels && len(f) >= 4 {
		m := len(f) &^ 3
		trapezoidAVX2(&f[0], &acc[0], &prev[0], &got[0], &miss[0], m, h)
		f, acc, prev, got, miss = f[m:], acc[m:], prev[m:], got[m:], miss[m:]
	}
	trapezoidScalar(f, acc, prev, got, miss, h)
}

// trapezoidScalar is trapezoid one voxel at a time.
func trapezoidScalar(f, acc, prev []float64, got []bool, miss []uint32, h float64) {
	acc, prev, got, miss = acc[:len(f)], prev[:len(f)], got[:len(f)], miss[:len(f)]
	for n, x := range f {
		s := prev[n] + x
		prev[n] = x
		if s == s {
			acc[n] += h * s
			got[n] = true
		} else if x != x {
			miss[n]++
		}
	}
}

// reset clears the accumulated dose.
func (a *accumulator) reset() {
	clear(a.acc)
	clear(a.missing)
	clear(a.got)
	a.frames = 0
}

// start begins a new series: the next frame has no predecessor.
func (a *accumulator) start() { a.frames = 0 }

// step returns the integration weight of a frame at time t (seconds) and
// whether it starts a new run (first frame, or a time that does not
// advance), and advances the clock.
func (a *accumulator) step(t float64) (w float64, first bool) {
	w = (t - a.lastT) * a.m.perSecond()
	first = a.frames == 0 || !(w > 0)
	if a.frames == 0 || w > 0 {
		a.lastT = t
	}
	a.frames++
	return w, first
}

// add integrates one frame of temperatures T (one per voxel) at time t
// seconds.
func (a *accumulator) add(T []float32, t float64) {
	w, first := a.step(t)
	for lo := 0; lo < len(T); lo += chunk {
		a.addChunk(T[lo:min(lo+chunk, len(T))], lo, w, first)
	}
}

// addChunk integrates temperatures T of the voxels lo, lo+1, ... with
// weight w (time unit of the model).
func (a *accumulator) addChunk(T []float32, lo int, w float64, first bool) {
	if a.cem && a.trap && !first && !vectorKernels {
		a.cemTrapezoid(T, lo, w)
		return
	}
	f := a.buf[:len(T)]
	a.m.rates(T, f)
	hi := lo + len(f)
	acc := a.acc[lo:hi:hi]
	prev := a.prev[lo:hi:hi]
	got := a.got[lo:hi:hi]
	miss := a.missing[lo:hi:hi]
	acc, prev, got, miss = acc[:len(f)], prev[:len(f)], got[:len(f)], miss[:len(f)]
	switch {
	case first:
		for n, x := range f {
			prev[n] = x
			if x != x {
				miss[n]++
			}
		}
	case a.trap:
		trapezoid(f, acc, prev, got, miss, 0.5*w)
	default:
		for n, x := range f {
			if x == x {
				acc[n] += w * x
				got[n] = true
			} else {
				miss[n]++
			}
		}
	}
}

// result writes the dose into out (NaN where no interval counted).
func (a *accumulator) result(out []float32) {
	nan := float32(math.NaN())
	for n, v := range a.acc {
		if a.got[n] {
			out[n] = float32(v)
		} else {
			out[n] = nan
		}
	}
}

// missingCounts returns the saturated missing-frame counts, nil if all zero.
func (a *accumulator) missingCounts() []uint16 {
	var out []uint16
	for n, c := range a.missing {
		if c == 0 {
			continue
		}
		if out == nil {
			out = make([]uint16, len(a.missing))
		}
		out[n] = uint16(min(c, math.MaxUint16))
	}
	return out
}

// integrate computes the dose of ts with m. It runs voxel block by voxel
// block through all frames, so the running sums never leave the cache.
func integrate(m rateModel, ts *TemperatureSeries) *DoseMap {
	if ts == nil {
		panic("dosemap: nil temperature series")
	}
	if len(ts.Times) != len(ts.Frames) {
		panic(fmt.Sprintf("dosemap: %d frame times for %d frames", len(ts.Times), len(ts.Frames)))
	}
	n := ts.Geometry.Len()
	for f, fr := range ts.Frames {
		if len(fr) != n {
			panic(fmt.Sprintf("dosemap: frame %d holds %d values for %d voxels", f, len(fr), n))
		}
	}
	sc := getScratch()
	defer sc.put()
	a := newAccumulator(m, n, sc)
	ws := make([]float64, len(ts.Frames))
	first := make([]bool, len(ts.Frames))
	for f := range ts.Frames {
		ws[f], first[f] = a.step(ts.Times[f])
	}
	for lo := 0; lo < n; lo += chunk {
		hi := min(lo+chunk, n)
		for f, fr := range ts.Frames {
			a.addChunk(fr[lo:hi], lo, ws[f], first[f])
		}
	}
	d := &DoseMap{Volume: *NewVolume(ts.Geometry), Unit: m.Unit()}
	a.result(d.Data)
	d.Missing = a.missingCounts()
	return d
}

// gridTolerance is the distance in mm within which two grids count as the
// same grid (SameGrid) when doses are added.
const gridTolerance = 0.01

// SumDose returns the voxel-wise sum of maps, which must share one grid and
// unit. A voxel that is NaN in some maps takes the sum of the others (an
// unmonitored sonication adds no known dose; Missing tells where that
// happened); it is NaN only where every map is NaN. Missing counts add.
func SumDose(maps ...*DoseMap) (*DoseMap, error) {
	if len(maps) == 0 {
		return nil, errors.New("no dose maps to add")
	}
	for n, m := range maps {
		if m == nil {
			return nil, fmt.Errorf("dose map %d is missing", n+1)
		}
		if err := m.Check(); err != nil {
			return nil, fmt.Errorf("dose map %d: %w", n+1, err)
		}
		if !m.Geometry.SameGrid(maps[0].Geometry, gridTolerance) {
			return nil, fmt.Errorf("dose map %d (%v) is not on the grid of dose map 1 (%v)", n+1, m.Geometry, maps[0].Geometry)
		}
		if m.Unit != maps[0].Unit {
			return nil, fmt.Errorf("dose map %d is in %q, dose map 1 in %q", n+1, m.Unit, maps[0].Unit)
		}
	}
	g := maps[0].Geometry
	out := &DoseMap{Volume: *NewVolume(g), Unit: maps[0].Unit}
	acc := make([]float64, g.Len())
	got := make([]bool, g.Len())
	var miss []uint32
	for _, m := range maps {
		for n, v := range m.Data {
			if v == v {
				acc[n] += float64(v)
				got[n] = true
			}
		}
		if m.Missing != nil {
			if miss == nil {
				miss = make([]uint32, g.Len())
			}
			for n, c := range m.Missing {
				miss[n] += uint32(c)
			}
		}
	}
	for n := range acc {
		if got[n] {
			out.Data[n] = float32(acc[n])
		} else {
			out.Data[n] = float32(math.NaN())
		}
	}
	if miss != nil {
		out.Missing = make([]uint16, g.Len())
		for n, c := range miss {
			out.Missing[n] = uint16(min(c, math.MaxUint16))
		}
	}
	return out, nil
}

// LethalMask reports, per voxel, whether d reaches threshold (d ≥ threshold;
// NaN is never lethal).
func LethalMask(d *DoseMap, threshold float64) []bool {
	out := make([]bool, len(d.Data))
	for n, v := range d.Data {
		out[n] = float64(v) >= threshold
	}
	return out
}

// DoseFromMap returns the ready-made dose map of a dose-map sonication
// (CEM43 minutes) as a DoseMap, sharing its data.
func DoseFromMap(s *Sonication) (*DoseMap, error) {
	if s == nil || s.Dose == nil {
		return nil, fmt.Errorf("%s holds no dose map", sonicationName(s))
	}
	if len(s.Dose) != s.Geometry.Len() {
		return nil, fmt.Errorf("%s: dose map holds %d values for a %d×%d×%d grid", sonicationName(s), len(s.Dose), s.Geometry.Cols, s.Geometry.Rows, s.Geometry.Slices)
	}
	return &DoseMap{Volume: Volume{Geometry: s.Geometry, Data: s.Dose}, Unit: CEM43{}.Unit()}, nil
}

// sonicationName names s in messages: "sonication 3 (label)".
func sonicationName(s *Sonication) string {
	if s == nil {
		return "sonication (none)"
	}
	if s.Label != "" {
		return fmt.Sprintf("sonication %d (%s)", s.Number, s.Label)
	}
	return fmt.Sprintf("sonication %d", s.Number)
}

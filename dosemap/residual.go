package dosemap

import (
	"fmt"
	"math"
	"runtime"
	"sync"
)

// Residual heat.
//
// PRF thermometry measures the change of temperature from each series'
// baseline frames. When a sonication starts before the tissue has cooled
// from the earlier ones, the heat still present at its baseline is not
// seen: the true temperature of every one of its frames is the measured
// one plus that hidden rise, R(x) = T_true(x, t_b) − T_body. EstimateResidual
// estimates R voxel by voxel from the cooling tails of the earlier
// sonications.
//
// Model. The Pennes bioheat equation (Pennes, J Appl Physiol 1948;1:93-122)
//
//	ρc ∂T/∂t = k ∇²T − w_b c_b (T − T_a) + Q
//
// is linear in the rise u = T − T_a, so the rise at any time is the sum of
// the rises each sonication caused (superposition), and each one, once its
// heating has stopped, evolves without source. In a homogeneous medium
// u = e^{−w t}·v with w = w_b c_b/(ρc) and v a solution of the heat
// equation ∂v/∂t = α∇²v, α = k/(ρc) (Pennes 1948; the substitution is the
// standard one, e.g. Carslaw & Jaeger, Conduction of Heat in Solids, 2nd
// ed. 1959, from memory). A Gaussian spot of variance σ² keeps its shape
// under conduction, its variance growing as σ² + 2αt (the heat kernel,
// Carslaw & Jaeger, from memory), so a voxel at distance d from its centre
// follows, from the time t_e of the last frame,
//
//	u(t) = a · e^{−w s} · (1 + s/τ)^{−3/2} · e^{q (1 − 1/(1+s/τ))},  s = t − t_e,
//
// with τ = σ²/(2α) at t_e and q = d²/(2σ²) ≥ 0: the centre (q = 0) only
// cools, a voxel off the centre first warms as the heat arrives and then
// cools like the centre. Per voxel, a ≥ 0 and the shape are fitted by
// least squares to the sonication's last frames (its cooling tail): either
// q = 0 with the voxel's own τ from a log-spaced set (from 1.25 times the
// tail's span up to the spot's τ) or the spot's τ with q from a set up to
// MaxOffCentre. The spot's τ is fitted first, with q = 0, on the voxels of
// at least half its hottest last value (see spotTau); no voxel may decay
// more slowly than its centre in the long run, as a flat tail
// extrapolated without decay would carry a voxel's rise unchanged to every
// later baseline. ResidualOptions.Dimensions 2 replaces the exponent 3/2
// by 1 (a spot much longer than wide). w is not measurable from a few
// seconds of tail: it is a setting (PerfusionRate, default 0, which errs
// on the side of more hidden heat; for muscle, w_b 0.6 kg m⁻³ s⁻¹, c_b
// 3617 J kg⁻¹ K⁻¹, ρc 3.73 MJ m⁻³ K⁻¹ give w ≈ 5.8e-4 s⁻¹, a time
// constant of about 29 minutes; IT'IS tissue database v4, from memory).
//
// The tail of sonication j, measured from its own baseline, holds besides
// its own heat the cooling of the earlier sonications' heat during its
// series (negative). Before fitting, the estimated cooling of the earlier
// contributions since j's baseline is added back, so each fit describes the
// heat of its own sonication only. The estimate for sonication n is then
// R = Σ_{k<n} mean over n's baseline frames of u_k(t). Tail frames are
// averaged over each voxel's 3×3 in-plane neighbours (finite values only)
// before fitting: the hidden field at a later baseline has spread by
// conduction over several millimetres, the noise of the frames has not.
//
// Limits: the decay form is exact only for a round Gaussian spot in an
// infinite homogeneous medium; an elongated spot, boundaries, large
// vessels and heterogeneous tissue cool otherwise, and MaxOffCentre is a
// calibration against the simulator (see there). A tail of a few
// frames spanning a few seconds fixes the decay poorly: the estimate is a
// review aid with an uncertainty of tens of per cent, not a measurement.
// A sonication's heat that never reached a measured voxel (outside the
// slab or plane) is not counted there. Where an earlier sonication did not
// measure a voxel (no valid tail frame, outside its grid, no thermometry
// such as a ready dose map, or no acquisition time) the estimate is
// unknown (NaN), not zero.

// ResidualOptions are the parameters of EstimateResidual.
type ResidualOptions struct {
	// TailFrames is the number of last frames of each series fitted
	// (default 3; at least 2 valid frames per voxel are needed).
	TailFrames int
	// PerfusionRate is w = w_b c_b/(ρc) in s⁻¹ (default 0: no perfusion).
	PerfusionRate float64
	// MaxTau is the slowest conduction time constant fitted, s (default
	// 3000).
	MaxTau float64
	// Dimensions is the number of directions heat spreads in the decay
	// form (the exponent of the conduction term is Dimensions/2): 3 for a
	// round spot (default), 2 for a spot much longer than wide.
	Dimensions int
}

func (o ResidualOptions) exponent() float64 {
	if o.Dimensions < 1 || o.Dimensions > 3 {
		return 1.5
	}
	return float64(o.Dimensions) / 2
}

// DefaultResidualOptions returns 3 tail frames, no perfusion, conduction
// in 3 dimensions and a slowest time constant of 3000 s.
func DefaultResidualOptions() ResidualOptions {
	return ResidualOptions{TailFrames: 3, MaxTau: 3000, Dimensions: 3}
}

func (o ResidualOptions) withDefaults() ResidualOptions {
	d := DefaultResidualOptions()
	if o.TailFrames < 2 {
		o.TailFrames = d.TailFrames
	}
	if !(o.MaxTau > 0) {
		o.MaxTau = d.MaxTau
	}
	if !(o.PerfusionRate > 0) {
		o.PerfusionRate = 0
	}
	return o
}

// CoolingTail is what EstimateResidual needs of one sonication: its grid,
// the times of its baseline frames and the last frames of its temperature
// rise. Times are seconds on one clock shared by every sonication of the
// session (for example seconds from the first sonication's start).
type CoolingTail struct {
	Geometry Geometry
	Baseline []float64   // times of the baseline frames
	Times    []float64   // times of the tail frames, increasing
	Rise     [][]float32 // per tail frame, temperature − body temperature, °C; NaN unmeasured
	// Mask, when not nil, limits the estimate to the voxels where it is
	// true (the region an analysis looks at); elsewhere the cooling is not
	// fitted and the later estimates are NaN.
	Mask []bool
	// Stacks are the tails of the sonication's further stacks (planes of
	// other orientations measured at the same time), each on its own grid
	// with its own times, without Stacks of their own. Each stack's
	// cooling is fitted on its own; the heat a sonication of several
	// stacks leaves at a later voxel is the mean of its stacks' estimates
	// where more than one measured the voxel, as its dose is.
	Stacks []*CoolingTail
}

// NewCoolingTail keeps the baseline frame times and the last tail frames
// of ts (opt.TailFrames, or all frames after the baseline when fewer).
// start is the time of ts's first frame on the session clock; bodyTemp the
// temperature ts's baseline stands for. It returns nil when ts has no
// frame after its baseline.
func NewCoolingTail(ts *TemperatureSeries, start float64, baselineFrames int, bodyTemp float64, opt ResidualOptions) *CoolingTail {
	opt = opt.withDefaults()
	nf := len(ts.Frames)
	nb := min(max(baselineFrames, 1), nf)
	if nf-nb < 1 {
		return nil
	}
	k := min(opt.TailFrames, nf-nb)
	t := &CoolingTail{Geometry: ts.Geometry}
	for f := 0; f < nb; f++ {
		t.Baseline = append(t.Baseline, start+ts.Times[f])
	}
	for f := nf - k; f < nf; f++ {
		t.Times = append(t.Times, start+ts.Times[f])
		r := make([]float32, len(ts.Frames[f]))
		for v, x := range ts.Frames[f] {
			r[v] = x - float32(bodyTemp)
		}
		t.Rise = append(t.Rise, r)
	}
	return t
}

// ResidualEstimate is the hidden rise at one sonication's baseline.
type ResidualEstimate struct {
	// Rise is the estimated rise over body temperature left by the earlier
	// sonications at this one's baseline, °C, on this sonication's grid;
	// NaN where unknown. All zero for the first sonication; nil when this
	// sonication has no tail (no thermometry or no acquisition time).
	Rise *Volume
	// CoolingS is the time from the previous sonication's last frame to
	// this one's first baseline frame, s; NaN for the first or when
	// unknown.
	CoolingS float64
	// Stacks holds the rise on the grid of each of the tail's Stacks, in
	// their order, as Rise on the first.
	Stacks []*Volume
}

// coolingFit is the fitted cooling of one sonication.
type coolingFit struct {
	g    Geometry
	te   float64   // time of the last tail frame
	amp  []float32 // a per voxel, °C; NaN unknown
	tau  []uint8   // index into taus
	taus []float64 // τ of each decay shape
	qs   []float64 // q of each decay shape (0: the centre of a spot)
	w    float64
	p    float64 // exponent of the conduction term
	// unknown holds the runs [start, end) of voxels whose a is NaN, heated
	// the voxels whose a is finite and not 0, in index order (set by
	// indexVoxels when the fit is made): addTo on f's own grid visits
	// only these.
	unknown [][2]int32
	heated  []int32
}

// indexVoxels fills f.unknown and f.heated from f.amp.
func (f *coolingFit) indexVoxels() {
	f.unknown, f.heated = nil, nil
	for v := 0; v < len(f.amp); {
		a := f.amp[v]
		if a == a {
			if a != 0 {
				f.heated = append(f.heated, int32(v))
			}
			v++
			continue
		}
		start := v
		for v < len(f.amp) && f.amp[v] != f.amp[v] {
			v++
		}
		f.unknown = append(f.unknown, [2]int32{int32(start), int32(v)})
	}
}

// table returns the decay factor e^{−w s}(1+s/τ)^{−3/2} for every τ of f at
// time t.
func (f *coolingFit) table(t float64) []float32 {
	s := t - f.te
	out := make([]float32, len(f.taus))
	for n, tau := range f.taus {
		x := 1 + s/tau
		if x <= 0 {
			x = math.SmallestNonzeroFloat64
		}
		out[n] = float32(math.Exp(-f.w*s+f.qs[n]*(1-1/x)) * math.Pow(x, -f.p))
	}
	return out
}

// meanTable returns the decay factors of every τ averaged over times ts.
func (f *coolingFit) meanTable(ts []float64) []float32 {
	tab := make([]float32, len(f.taus))
	for _, t := range ts {
		for n, x := range f.table(t) {
			tab[n] += x / float32(len(ts))
		}
	}
	return tab
}

// addTo adds f's rise at the baseline of tail tl (mean over its baseline
// frames) to rise, and the change of f's rise from that baseline to each
// of tl's tail frames to corr[frame]; NaN where f is unknown. Both are on
// tl's grid: f's values are resampled onto it when the grids differ (NaN
// outside f's grid).
//
// With only not nil, voxels of g outside only are left as they are (the
// estimate of several stacks, needed within their masks only); spans, when
// not nil, are only's first and last voxel of each row of g (see
// maskSpans): the voxels of a row outside its span are not visited.
//
// With acc not nil, rise and corr are not used: at each voxel of only
// where f is known its rise and changes are added to acc's sums and the
// voxel counted (acc.sumR, acc.sumC, acc.cnt); unknown voxels are left as
// they are. The sums are those of adding addTo's values on zeroed
// buffers, to the last bit (x + 0 is x).
func (f *coolingFit) addTo(g Geometry, tl *CoolingTail, rise []float32, corr [][]float32, only []bool, spans []rowSpan, acc *stackScratch) {
	nan := float32(math.NaN())
	tb := f.meanTable(tl.Baseline)
	tf := make([][]float32, len(tl.Times))
	for fr, t := range tl.Times {
		tf[fr] = f.table(t)
	}
	if f.g.SameGrid(g, 0.01) {
		if acc == nil {
			// Each voxel is changed by itself, once, so the unknown runs
			// and then the heated voxels may be visited in any order:
			// NaN where a is unknown, the rise and its changes added
			// where a > 0, voxels with a = 0 left as they are (only is not
			// consulted: f is unknown outside the mask it was fitted in).
			for _, r := range f.unknown {
				for v := r[0]; v < r[1]; v++ {
					rise[v] = nan
				}
			}
			for _, v := range f.heated {
				a := f.amp[v]
				ti := f.tau[v]
				b := a * tb[ti]
				rise[v] += b
				for fr := range tf {
					corr[fr][v] += a*tf[fr][ti] - b
				}
			}
			return
		}
		for v, a := range f.amp {
			if a != a || (only != nil && !only[v]) {
				continue
			}
			acc.cnt[v]++
			if a == 0 {
				continue
			}
			ti := f.tau[v]
			b := a * tb[ti]
			acc.sumR[v] += b
			for fr := range tf {
				acc.sumC[fr][v] += a*tf[fr][ti] - b
			}
		}
		return
	}
	// f's values a·table resampled trilinearly onto g (as Resample does,
	// to the last bit): the taps of each voxel of g are found once for
	// every table.
	tabs := append([][]float32{tb}, tf...)
	vals := make([]float64, len(tabs))
	o0, o1, o2 := f.g.Voxel(g.Point(0, 0, 0))
	a0, a1, a2 := f.g.Voxel(g.Point(1, 0, 0))
	b0, b1, b2 := f.g.Voxel(g.Point(0, 1, 0))
	c0, c1, c2 := f.g.Voxel(g.Point(0, 0, 1))
	a0, a1, a2 = a0-o0, a1-o1, a2-o2
	b0, b1, b2 = b0-o0, b1-o1, b2-o2
	c0, c1, c2 = c0-o0, c1-o1, c2-o2
	var idx [8]int
	var w [8]float64
	for k := 0; k < g.Slices; k++ {
		fk := float64(k)
		for j := 0; j < g.Rows; j++ {
			row := k*g.Rows + j
			first, last := 0, g.Cols-1
			if spans != nil {
				first, last = spans[row].first, spans[row].last
				if first > last {
					continue // no voxel of only in this row
				}
			}
			fj := float64(j)
			x := o0 + fj*b0 + fk*c0
			y := o1 + fj*b1 + fk*c1
			z := o2 + fj*b2 + fk*c2
			// Voxels of the row beyond ilo..ihi lie outside f's grid
			// (Taps would find no voxel): unknown.
			ilo, ihi := rowInside(x, a0, f.g.Cols, 0, g.Cols-1)
			ilo, ihi = rowInside(y, a1, f.g.Rows, ilo, ihi)
			ilo, ihi = rowInside(z, a2, f.g.Slices, ilo, ihi)
			for i, v := first, row*g.Cols+first; i <= last; i, v = i+1, v+1 {
				if only != nil && !only[v] {
					continue
				}
				n := 0
				if i >= ilo && i <= ihi {
					fi := float64(i)
					n = f.g.Taps(x+fi*a0, y+fi*a1, z+fi*a2, &idx, &w)
				}
				if n == 0 {
					if acc != nil {
						continue
					}
					rise[v] = nan
					for fr := range tf {
						corr[fr][v] = nan
					}
					continue
				}
				clear(vals)
				known := true
				for t := 0; t < n; t++ {
					a := f.amp[idx[t]]
					if a != a {
						known = false
						break
					}
					ti := f.tau[idx[t]]
					for q, tab := range tabs {
						vals[q] += w[t] * float64(a*tab[ti])
					}
				}
				if !known {
					if acc != nil {
						continue
					}
					rise[v] = nan
					for fr := range tf {
						corr[fr][v] = nan
					}
					continue
				}
				at := float32(vals[0])
				if acc != nil {
					acc.sumR[v] += at
					for fr := range tf {
						acc.sumC[fr][v] += float32(vals[fr+1]) - at
					}
					acc.cnt[v]++
					continue
				}
				rise[v] += at
				for fr := range tf {
					corr[fr][v] += float32(vals[fr+1]) - at
				}
			}
		}
	}
}

// rowInside narrows lo..hi to the indices i whose coordinate x0 + i·a
// may lie within half a voxel of a grid axis of n voxels (-0.5 to
// n-0.5), with one index to spare on each side for rounding (the exact
// test is Taps's).
func rowInside(x0, a float64, n, lo, hi int) (int, int) {
	if math.Abs(a) < 1e-9 {
		if x0 < -1 || x0 > float64(n) {
			return 1, 0 // none
		}
		return lo, hi
	}
	t0, t1 := (-0.5-x0)/a, (float64(n)-0.5-x0)/a
	if t0 > t1 {
		t0, t1 = t1, t0
	}
	if t1 < float64(lo)-1 || t0 > float64(hi)+1 {
		return 1, 0
	}
	return max(lo, int(math.Floor(t0))-1), min(hi, int(math.Ceil(t1))+1)
}

// EstimateResidual estimates, for each sonication in delivery order, the
// rise still present at its baseline from the earlier ones (see the model
// above). tails[n] nil means sonication n has no usable tail: its own
// estimate is nil and the later estimates are unknown (NaN) everywhere.
func EstimateResidual(tails []*CoolingTail, opt ResidualOptions) ([]ResidualEstimate, error) {
	return estimateResidual(tails, opt, false)
}

// estimateResidual is EstimateResidual; with everyVoxel the heat of
// sonications of several stacks is summed visiting every voxel of the
// grid (addStacksToAll, the straightforward form) instead of the mask's.
func estimateResidual(tails []*CoolingTail, opt ResidualOptions, everyVoxel bool) ([]ResidualEstimate, error) {
	opt = opt.withDefaults()
	out := make([]ResidualEstimate, len(tails))
	fits := make([][]*coolingFit, len(tails)) // per sonication, per stack
	broken := false                           // an earlier sonication has no tail
	for n, tl := range tails {
		out[n].CoolingS = math.NaN()
		if tl == nil {
			broken = true
			continue
		}
		for _, st := range append([]*CoolingTail{tl}, tl.Stacks...) {
			if err := checkTail(st); err != nil {
				return nil, fmt.Errorf("sonication %d of the residual heat estimate: %w", n+1, err)
			}
		}
		if n > 0 && tails[n-1] != nil && len(tl.Baseline) > 0 {
			prev := tails[n-1]
			out[n].CoolingS = tl.Baseline[0] - prev.Times[len(prev.Times)-1]
		}
		rises, fs := estimateStacks(append([]*CoolingTail{tl}, tl.Stacks...), fits[:n], broken, opt, everyVoxel)
		out[n].Rise, fits[n] = rises[0], fs
		if len(rises) > 1 {
			out[n].Stacks = rises[1:]
		}
	}
	return out, nil
}

// estimateStacks runs estimateStack on each of one sonication's stacks,
// at once on as many processors as there are (the stacks depend on the
// earlier sonications' fits only, not on each other), and returns their
// rises and fits in the order of sts.
func estimateStacks(sts []*CoolingTail, earlier [][]*coolingFit, broken bool, opt ResidualOptions, everyVoxel bool) ([]*Volume, []*coolingFit) {
	rises := make([]*Volume, len(sts))
	fits := make([]*coolingFit, len(sts))
	if len(sts) == 1 || runtime.GOMAXPROCS(0) == 1 {
		for s, st := range sts {
			rises[s], fits[s] = estimateStack(st, earlier, broken, opt, everyVoxel)
		}
		return rises, fits
	}
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for s, st := range sts {
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer func() { <-sem; wg.Done() }()
			rises[s], fits[s] = estimateStack(st, earlier, broken, opt, everyVoxel)
		}()
	}
	wg.Wait()
	return rises, fits
}

// estimateStack returns the rise the earlier sonications' fits leave at
// the baseline of tail tl (NaN everywhere when broken), and the fit of
// tl's own cooling, the earlier heat's cooling since the baseline added
// back to its frames.
func estimateStack(tl *CoolingTail, earlier [][]*coolingFit, broken bool, opt ResidualOptions, everyVoxel bool) (*Volume, *coolingFit) {
	g := tl.Geometry
	nv := g.Len()
	rise := make([]float32, nv)
	if broken {
		for v := range rise {
			rise[v] = float32(math.NaN())
		}
	}
	// Earlier contributions: at the baseline (the estimate) and the
	// cooling of them from the baseline to each tail frame (added back to
	// the tail before it is fitted).
	corr := make([][]float32, len(tl.Times))
	for f := range corr {
		corr[f] = make([]float32, nv)
	}
	var sc *stackScratch
	for k := 0; k < len(earlier) && !broken; k++ {
		if len(earlier[k]) == 1 {
			earlier[k][0].addTo(g, tl, rise, corr, nil, nil, nil)
			continue
		}
		if everyVoxel {
			addStacksToAll(earlier[k], g, tl, rise, corr)
			continue
		}
		if sc == nil {
			sc = newStackScratch(g, tl.Mask, len(corr))
		}
		sc.addStacksTo(earlier[k], g, tl, rise, corr)
	}
	// Each tail frame on its own goroutine (the frames are independent);
	// corr[f] is not needed after its frame and holds the corrected rise.
	tail := make([][]float32, len(tl.Rise))
	var wg sync.WaitGroup
	for f, r := range tl.Rise {
		wg.Add(1)
		go func() {
			defer wg.Done()
			c := corr[f][:len(r)]
			for v, x := range r {
				if d := c[v]; d == d {
					x -= d // the earlier heat's cooling since the baseline, added back
				}
				c[v] = x
			}
			tail[f] = smoothInPlane(g, c, tl.Mask)
		}()
	}
	wg.Wait()
	return &Volume{Geometry: g, Data: rise}, fitCooling(g, tl.Times, tail, tl.Mask, opt)
}

// stackScratch holds addStacksTo's buffers, reused over the earlier
// sonications, and the voxels of the tail's mask (all without one).
type stackScratch struct {
	sumR    []float32
	sumC    [][]float32
	cnt     []uint8
	in      []int     // the voxels estimated: the mask's, in index order
	spans   []rowSpan // the mask's span in each row of the grid; nil without a mask
	outside bool      // the voxels outside the mask have been set unknown
}

// rowSpan is the first and last voxel (column) of a mask in one row of a
// grid; first > last when the row holds none.
type rowSpan struct{ first, last int }

// maskSpans returns the span of mask in each row of g (index k·Rows + j).
func maskSpans(g Geometry, mask []bool) []rowSpan {
	out := make([]rowSpan, g.Rows*g.Slices)
	for row := range out {
		out[row] = rowSpan{first: g.Cols, last: -1}
		for i, in := range mask[row*g.Cols : (row+1)*g.Cols] {
			if in {
				out[row].first = min(out[row].first, i)
				out[row].last = i
			}
		}
	}
	return out
}

func newStackScratch(g Geometry, mask []bool, frames int) *stackScratch {
	nv := g.Len()
	sc := &stackScratch{sumR: make([]float32, nv), cnt: make([]uint8, nv)}
	for range frames {
		sc.sumC = append(sc.sumC, make([]float32, nv))
	}
	for v := range nv {
		if mask == nil || mask[v] {
			sc.in = append(sc.in, v)
		}
	}
	if mask != nil {
		sc.spans = maskSpans(g, mask)
	}
	return sc
}

// addStacksTo adds to rise and corr, as coolingFit.addTo does, the heat of
// one sonication measured on several stacks (fits): at each voxel the mean
// of the stacks whose estimate is known there; NaN where none is, and
// outside tl's Mask (not estimated).
//
// Only the voxels of the mask are visited, each fit adding straight to
// the sums (coolingFit.addTo with acc); rise outside the mask is set NaN
// once (NaN stays NaN under the later sums), corr is left as it is there.
// The result is that of visiting every voxel, to the last bit
// (TestResidualStacksMaskedVisit).
func (sc *stackScratch) addStacksTo(fits []*coolingFit, g Geometry, tl *CoolingTail, rise []float32, corr [][]float32) {
	sumR, sumC, cnt := sc.sumR, sc.sumC, sc.cnt
	for _, v := range sc.in {
		sumR[v], cnt[v] = 0, 0
		for f := range sumC {
			sumC[f][v] = 0
		}
	}
	for _, fit := range fits {
		fit.addTo(g, tl, nil, nil, tl.Mask, sc.spans, sc)
	}
	nan := float32(math.NaN())
	for _, v := range sc.in {
		k := cnt[v]
		if k == 0 {
			rise[v] = nan
			continue
		}
		rise[v] += sumR[v] / float32(k)
		for f := range corr {
			corr[f][v] += sumC[f][v] / float32(k)
		}
	}
	if !sc.outside && tl.Mask != nil {
		for v, in := range tl.Mask {
			if !in {
				rise[v] = nan // outside the mask not estimated
			}
		}
		sc.outside = true
	}
}

// addStacksToAll is addStacksTo visiting every voxel of the grid: the
// straightforward form, kept to check the other against.
func addStacksToAll(fits []*coolingFit, g Geometry, tl *CoolingTail, rise []float32, corr [][]float32) {
	nv := g.Len()
	sumR, r, cnt := make([]float32, nv), make([]float32, nv), make([]uint8, nv)
	var sumC, c [][]float32
	for range corr {
		sumC = append(sumC, make([]float32, nv))
		c = append(c, make([]float32, nv))
	}
	for _, fit := range fits {
		clear(r)
		for f := range c {
			clear(c[f])
		}
		fit.addTo(g, tl, r, c, tl.Mask, nil, nil)
		for v, x := range r {
			if x != x || (tl.Mask != nil && !tl.Mask[v]) {
				continue // unknown; outside the mask not estimated
			}
			sumR[v] += x
			for f := range c {
				sumC[f][v] += c[f][v]
			}
			cnt[v]++
		}
	}
	nan := float32(math.NaN())
	for v, k := range cnt {
		if k == 0 {
			rise[v] = nan
			continue
		}
		rise[v] += sumR[v] / float32(k)
		for f := range corr {
			corr[f][v] += sumC[f][v] / float32(k)
		}
	}
}

func checkTail(t *CoolingTail) error {
	if err := t.Geometry.Validate(); err != nil {
		return err
	}
	if len(t.Times) == 0 || len(t.Times) != len(t.Rise) {
		return fmt.Errorf("%d tail frames with %d times", len(t.Rise), len(t.Times))
	}
	for f, r := range t.Rise {
		if len(r) != t.Geometry.Len() {
			return fmt.Errorf("tail frame %d holds %d voxels, the grid %d", f+1, len(r), t.Geometry.Len())
		}
		if f > 0 && !(t.Times[f] > t.Times[f-1]) {
			return fmt.Errorf("tail frame times %g, %g do not increase", t.Times[f-1], t.Times[f])
		}
	}
	return nil
}

// smoothInPlane returns the mean of the finite values among each voxel's
// 3×3 in-plane neighbours; NaN where the voxel itself is NaN or outside
// mask (nil: everywhere). The neighbours are summed row by row, column by
// column within a row (float32), at the grid's edges over those inside.
func smoothInPlane(g Geometry, x []float32, mask []bool) []float32 {
	out := make([]float32, len(x))
	nan := float32(math.NaN())
	cols, rows := g.Cols, g.Rows
	for k := 0; k < g.Slices; k++ {
		for j := 0; j < rows; j++ {
			row := (k*rows + j) * cols
			up, down := row-cols, row+cols // rows j−1 and j+1, read inside the slice only
			interior := j > 0 && j < rows-1
			for i := 0; i < cols; i++ {
				n := row + i
				if mask != nil && !mask[n] {
					out[n] = nan
					continue
				}
				if x[n] != x[n] {
					out[n] = x[n]
					continue
				}
				var s float32
				var c int
				if interior && i > 0 && i < cols-1 {
					// The nine neighbours in the order of the loops below.
					for _, y := range [9]float32{x[up+i-1], x[up+i], x[up+i+1], x[n-1], x[n], x[n+1], x[down+i-1], x[down+i], x[down+i+1]} {
						if y == y {
							s += y
							c++
						}
					}
					out[n] = s / float32(c)
					continue
				}
				for dj := max(j-1, 0); dj <= min(j+1, rows-1); dj++ {
					for di := max(i-1, 0); di <= min(i+1, cols-1); di++ {
						if y := x[g.Index(di, dj, k)]; y == y {
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

// tauCount is the number of conduction time constants tried per voxel.
const tauCount = 64

// MaxOffCentre is the largest q of the off-centre decay shapes (see the
// model): e^q bounds how much a voxel's rise can still grow relative to
// the centre's decay, q = d²/(2σ²) for a voxel at distance d from the
// centre of a Gaussian spot (q = 3: d ≈ 2.4σ). A few tail frames fix a
// large q poorly, and noise fitted as arriving heat grows by up to e^q:
// 3 is a calibration against the simulator's bioheat solution, keeping
// the estimate within 30 % of it on the short-gap sessions
// (sim.ShortGapSession, gaps of 5–60 s; 4 overshoots at 60 s by half, 1
// falls short by a third), not on patient data.
const MaxOffCentre = 3.0

// offCentreCount is the number of off-centre shapes tried per voxel.
const offCentreCount = 12

// fitCooling fits the decay form of the model, a ≥ 0, to each voxel's
// tail frames by least squares: for each shape h (τ, q) of the set,
// a = max(0, Σ y h / Σ h²); the shape with the least squared error wins
// (the slowest centre shape on ties). Voxels with fewer than two finite
// tail frames are unknown.
func fitCooling(g Geometry, times []float64, tail [][]float32, mask []bool, opt ResidualOptions) *coolingFit {
	te := times[len(times)-1]
	span := te - times[0]
	lo := math.Max(1.25*span, 1)
	hi := math.Max(opt.MaxTau, 2*lo)
	f := &coolingFit{g: g, te: te, w: opt.PerfusionRate, p: opt.exponent(), amp: make([]float32, g.Len()), tau: make([]uint8, g.Len())}
	for n := 0; n < tauCount; n++ {
		f.taus = append(f.taus, lo*math.Pow(hi/lo, float64(n)/(tauCount-1)))
		f.qs = append(f.qs, 0)
	}
	h := make([][]float32, len(times)) // h[frame][shape]
	for fr, t := range times {
		h[fr] = f.table(t)
	}
	nv := g.Len()
	spot := spotTau(tail, h)
	top := spot
	// Off-centre shapes: the spot's τ with heat still arriving.
	for m := 1; m <= offCentreCount; m++ {
		f.taus = append(f.taus, f.taus[spot])
		f.qs = append(f.qs, MaxOffCentre*float64(m)/offCentreCount)
	}
	for fr, t := range times {
		h[fr] = f.table(t)
	}
	shapes := make([]int, 0, top+1+offCentreCount)
	for n := top; n >= 0; n-- {
		shapes = append(shapes, n)
	}
	for n := tauCount; n < len(f.taus); n++ {
		shapes = append(shapes, n)
	}
	nt := len(times)
	hs := make([]float64, 0, len(shapes)*nt) // decay factor per shape and frame
	ihh := make([]float64, len(shapes))      // 1/Σh² per shape
	slot := make([]int, len(f.taus))         // position of each shape in shapes
	for m, n := range shapes {
		var hh float64
		for fr := range times {
			x := float64(h[fr][n])
			hs = append(hs, x)
			hh += x * x
		}
		ihh[m] = 1 / hh
		slot[n] = m
	}
	workers := min(runtime.GOMAXPROCS(0), max(1, nv/4096))
	var wg sync.WaitGroup
	per := (nv + workers - 1) / workers
	for lo := 0; lo < nv; lo += per {
		hiV := min(lo+per, nv)
		wg.Add(1)
		go func() {
			defer wg.Done()
			y := make([]float64, nt)
			for v := lo; v < hiV; v++ {
				if mask != nil && !mask[v] {
					f.amp[v] = float32(math.NaN())
					continue
				}
				valid := 0
				var yy float64
				for fr := range tail {
					if y := tail[fr][v]; y == y {
						valid++
						yy += float64(y) * float64(y)
					}
				}
				if valid < 2 {
					f.amp[v] = float32(math.NaN())
					continue
				}
				if valid == nt {
					// Every frame valid (the common case): the least
					// squared error yy − yh²/hh is the largest yh²/hh
					// with yh > 0 (a = 0, error yy, otherwise).
					for fr := range tail {
						y[fr] = float64(tail[fr][v])
					}
					bestS, bestT := 0.0, top
					// Four shapes at a time: four independent sums, each
					// in frame order as one at a time would be (the same
					// bits), compared in the order of shapes.
					m := 0
					for ; m+4 <= len(shapes); m += 4 {
						h0 := hs[m*nt : (m+1)*nt][:len(y)]
						h1 := hs[(m+1)*nt : (m+2)*nt][:len(y)]
						h2 := hs[(m+2)*nt : (m+3)*nt][:len(y)]
						h3 := hs[(m+3)*nt : (m+4)*nt][:len(y)]
						var s0, s1, s2, s3 float64
						for fr, yv := range y {
							s0 += yv * h0[fr]
							s1 += yv * h1[fr]
							s2 += yv * h2[fr]
							s3 += yv * h3[fr]
						}
						for q, yh := range [4]float64{s0, s1, s2, s3} {
							if sc := yh * yh * ihh[m+q]; yh > 0 && sc > bestS*(1+1e-12) {
								bestS, bestT = sc, shapes[m+q]
							}
						}
					}
					for ; m < len(shapes); m++ {
						var yh float64
						for fr, x := range hs[m*nt : (m+1)*nt] {
							yh += y[fr] * x
						}
						if sc := yh * yh * ihh[m]; yh > 0 && sc > bestS*(1+1e-12) {
							bestS, bestT = sc, shapes[m]
						}
					}
					var yh float64
					for fr := range tail {
						yh += y[fr] * float64(h[fr][bestT])
					}
					f.amp[v] = float32(math.Max(0, yh*ihh[slot[bestT]]))
					f.tau[v] = uint8(bestT)
					continue
				}
				best, bestA, bestT := math.Inf(1), 0.0, top
				for _, n := range shapes {
					var yh, hh float64
					for fr := range tail {
						if y := tail[fr][v]; y == y {
							x := float64(h[fr][n])
							yh += float64(y) * x
							hh += x * x
						}
					}
					a := math.Max(0, yh/hh)
					sse := yy - 2*a*yh + a*a*hh
					if sse < best-1e-12*math.Max(yy, 1e-12) {
						best, bestA, bestT = sse, a, n
					}
				}
				f.amp[v] = float32(bestA)
				f.tau[v] = uint8(bestT)
			}
		}()
	}
	wg.Wait()
	f.indexVoxels()
	return f
}

// Owned reports whether ts's frames were computed by Thermometry (and may
// be changed by their user) rather than shared with the sonication it was
// made from (a temperature-map series passed through).
func (ts *TemperatureSeries) Owned() bool { return ts.slab != nil }

// spotTau returns the index of the conduction time constant of the
// sonication's spot: the τ that fits the tails of the voxels whose last
// frame is at least half the hottest (the spot's centre, where the decay
// form holds) with the least summed squared error, each with its own
// amplitude. Without a positive last frame it returns the slowest.
func spotTau(tail [][]float32, h [][]float32) int {
	last := tail[len(tail)-1]
	peak := float32(0)
	for _, x := range last {
		if x == x && x > peak {
			peak = x
		}
	}
	if !(peak > 0) {
		return tauCount - 1
	}
	sse := make([]float64, tauCount)
	for v, x := range last {
		if !(x >= peak/2) {
			continue
		}
		var yy float64
		for fr := range tail {
			if y := tail[fr][v]; y == y {
				yy += float64(y) * float64(y)
			}
		}
		for n := 0; n < tauCount; n++ {
			var yh, hh float64
			for fr := range tail {
				if y := tail[fr][v]; y == y {
					x := float64(h[fr][n])
					yh += float64(y) * x
					hh += x * x
				}
			}
			a := math.Max(0, yh/hh)
			sse[n] += yy - 2*a*yh + a*a*hh
		}
	}
	best := tauCount - 1
	for n := tauCount - 1; n >= 0; n-- {
		if sse[n] < sse[best]*(1-1e-12) {
			best = n
		}
	}
	return best
}

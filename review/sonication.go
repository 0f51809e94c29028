package review

import (
	"context"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"
	"sync"

	"dosecover/dosemap"
)

// doseModel returns the dose model selected by s.
func (s Settings) doseModel() dosemap.DoseModel {
	if s.Model == "arrhenius" {
		a := s.Arrhenius
		if a.A == 0 || a.Ea == 0 {
			a = dosemap.DefaultArrhenius()
		}
		return a
	}
	c := s.CEM43
	if c.RAbove == 0 || c.RBelow == 0 {
		c = dosemap.DefaultCEM43()
	}
	return c
}

// prepareSonication computes the dose of one sonication on the reference
// thermometry grid ref, its temperature figures and thermometry quality.
// It returns the dose unit. clock is the time of the series' first frame
// on the session clock (NaN unknown: no cooling tail is kept). offset,
// when not nil, is added to every temperature (finite values only) before
// the dose is computed (the residual heat correction; on the sonication's
// own grid).
func prepareSonication(ctx context.Context, so *dosemap.Sonication, s Settings, ref dosemap.Geometry, keep *keepBox, clock float64, offset []float32) (*sonData, string, error) {
	if err := so.Geometry.Validate(); err != nil {
		return nil, "", fmt.Errorf("thermometry grid: %w", err)
	}
	sd := &sonData{number: so.Number, label: so.Label}
	m := s.doseModel()
	var dm *dosemap.DoseMap
	switch {
	case so.Dose != nil:
		if s.Model != "cem43" {
			return nil, "", fmt.Errorf("the case holds a ready dose map (CEM43) for this sonication; the %s model needs its thermometry", s.Model)
		}
		d, err := dosemap.DoseFromMap(so)
		if err != nil {
			return nil, "", err
		}
		dm = d
	default:
		// Frames kept in the files are decoded for the thermometry only.
		r, notes, done, err := so.Resident(ctx)
		if err != nil {
			return nil, "", err
		}
		ts, err := thermometry(r, s.Thermometry)
		done()
		if err != nil {
			return nil, "", err
		}
		sd.notes = notes
		if err := ctx.Err(); err != nil {
			return nil, "", err
		}
		if clock == clock && offset == nil {
			bt := s.Thermometry.BodyTempC
			if bt == 0 {
				bt = dosemap.DefaultBodyTemp
			}
			sd.tail = dosemap.NewCoolingTail(ts, clock, baselineFrames(s.Thermometry), bt, dosemap.DefaultResidualOptions())
		}
		if offset != nil {
			addOffset(ts, offset)
		}
		dm = m.Dose(ts)
		hottest := make([]int, len(ts.Quality))
		for f, q := range ts.Quality {
			hottest[f] = q.Hottest
		}
		sd.temp = temperatureStats(ts.Geometry, ts.Times, ts.Frames, hottest)
		sd.peakTemp = ts.Peak()
		sd.quality = frameQuality(so.Number, ts.Quality)
		kept := false
		if ts.Geometry.SameGrid(ref, 0.01) {
			sd.series, sd.source = ts, so
			if keep != nil {
				sd.series = keep.crop(ts)
			}
			kept = sd.series == ts
		} else if nz := newStackNoise(ts, keep); nz != nil {
			// Off the session's grid: the stack's own noise (see mcstacks.go).
			sd.noise = []*stackNoise{nz}
			kept = nz.ts == ts
		}
		if !kept {
			ts.Release() // nothing refers to its frames any more
		}
	}
	sd.dose = onGrid(&dm.Volume, ref)
	sd.peak = math.Inf(-1)
	for _, x := range sd.dose {
		if x == x && float64(x) > sd.peak {
			sd.peak = float64(x)
		}
	}
	return sd, dm.Unit, nil
}

// frameQuality converts the thermometry's frame quality.
func frameQuality(number int, q []dosemap.FrameQuality) *SonicationQuality {
	sq := &SonicationQuality{Sonication: number, Frames: []FrameQuality{}, FlaggedFrames: []int{}}
	minSNR := math.Inf(1)
	for f, fq := range q {
		sq.Frames = append(sq.Frames, FrameQuality{TimeS: fq.Time, Motion: finite(fq.Motion), DriftC: finite(fq.Drift),
			SNR: opt(fq.SNR), Wraps: fq.Wraps, Invalid: fq.Invalid, Flagged: fq.Flagged, Note: fq.Note})
		if fq.Flagged {
			sq.FlaggedFrames = append(sq.FlaggedFrames, f+1)
		}
		if x := fq.Motion; x == x {
			sq.MaxMotion = math.Max(sq.MaxMotion, x)
		}
		if x := math.Abs(fq.Drift); x == x {
			sq.MaxDriftC = math.Max(sq.MaxDriftC, x)
		}
		if x := fq.SNR; x == x && x < minSNR {
			minSNR = x
		}
		sq.Wraps += fq.Wraps
		sq.Invalid += fq.Invalid
	}
	sq.MinSNR = opt(minSNR)
	return sq
}

// onGrid returns v's data on grid ref, resampled when the grids differ.
func onGrid(v *dosemap.Volume, ref dosemap.Geometry) []float32 {
	if v.Geometry.SameGrid(ref, 0.01) {
		return v.Data
	}
	return dosemap.Resample(v, ref).Data
}

// temperatureStats measures the hottest valid voxel over all frames, the
// in-plane 3×3 mean around the hottest voxel of each frame (largest over
// frames; common practice), and the time the hottest voxel spent at or
// above 43 °C (rectangle rule: each frame stands for the interval to the
// next frame; the last frame for the interval before it). hottest holds
// each frame's hottest valid voxel as the thermometry found it
// (dosemap.FrameQuality.Hottest, -1 none).
func temperatureStats(g dosemap.Geometry, times []float64, frames [][]float32, hottest []int) *tempStats {
	t := &tempStats{peak: math.NaN(), peak3: math.NaN(), above43: math.NaN()}
	best := -1
	for f, fr := range frames {
		fbest := hottest[f]
		if fbest < 0 {
			continue
		}
		fv := fr[fbest]
		if best < 0 || float64(fv) > t.peak {
			t.peak, best = float64(fv), fbest
		}
		i, j, k := g.IJK(fbest)
		var sum float64
		var cnt int
		for dj := -1; dj <= 1; dj++ {
			for di := -1; di <= 1; di++ {
				if g.Contains(i+di, j+dj, k) {
					if x := fr[g.Index(i+di, j+dj, k)]; x == x {
						sum += float64(x)
						cnt++
					}
				}
			}
		}
		if m := sum / float64(cnt); math.IsNaN(t.peak3) || m > t.peak3 {
			t.peak3 = m
		}
	}
	if best < 0 {
		return t
	}
	t.peakPos = g.Point(ijk(g, best))
	t.above43 = 0
	for f, fr := range frames {
		if x := fr[best]; x == x && x >= 43 {
			t.above43 += frameInterval(times, f)
		}
	}
	return t
}

func frameInterval(times []float64, f int) float64 {
	switch {
	case len(times) < 2:
		return 0
	case f+1 < len(times):
		return times[f+1] - times[f]
	default:
		return times[f] - times[f-1]
	}
}

// mcCache keeps Monte Carlo trial doses between analyses: they depend on
// the included sonications, the margin region, the trials and the seed, not
// on the threshold. Only the voxels whose outcome some analysis found
// uncertain are computed (see mcSkipSigmas); later thresholds add the
// voxels they need.
type mcCache struct {
	key    string
	slot   []int32     // per coarse voxel: its column in trials, -1 not computed
	idx    []int       // coarse voxels computed, in column order
	trials [][]float32 // per trial, cumulative dose at idx

	region   []int      // coarse voxels of the target and margin region
	stk      *stackTaps // the region on the stacks of sonications off the session's grid (nil: none)
	lo, hi   []float32  // per region voxel, the dose bounds of boxDose (nil: not pruning)
	boundsOK bool       // lo, hi computed
}

// mcSkipSigmas bounds the temperature error of a Monte Carlo frame. The
// error of one frame is normal with standard deviation Sigma (see
// dosemap.MonteCarlo), so it exceeds mcSkipSigmas·Sigma with probability
// 2Φ(−8) ≈ 1.2e-15 (normal tail). Both dose models integrate a rate that
// increases with temperature, with positive weights, so within that bound
// a trial's dose lies between the doses of the thermometry with every
// noisy frame moved down and up by 8·Sigma (computed once per analysis
// for the region), and its log-dose moves by at most the larger distance
// ln(hi/D) or ln(D/lo); an analysis voxel moves by at most Σ|w|·that over
// its cubic taps w. A voxel whose interval lies entirely on one side of
// the threshold has the noiseless outcome in every trial (except with
// probability below 1.2e-15 per frame drawn) and is not simulated: only
// the uncertain voxels and the taps of the uncertain analysis voxels are.
const mcSkipSigmas = 8

// mcOutcome is what the Monte Carlo trials of one analysis give, kept
// apart from the result while the rest of the analysis runs beside them
// (see apply).
type mcOutcome struct {
	warnings []string
	trials   int // 0: no trials (no sonication with a noise estimate)
	p05, p95 *float64
	prob     *dosemap.Volume
	pf       map[int]float64 // lethal probability per monitored analysis voxel of the target
}

// apply adds o to r: warnings, percentiles of the covered fraction, the
// probability map and the certainty of r's holes (which must be final),
// their voxels weighted by the target occupancy occ.
func (o *mcOutcome) apply(r *Result, occ []float32) {
	r.Warnings = append(r.Warnings, o.warnings...)
	if o.trials == 0 {
		return
	}
	r.CoveredFractionP05, r.CoveredFractionP95 = o.p05, o.p95
	r.Trials = o.trials
	r.Probability = o.prob
	// Hole certainty from the fine-voxel lethal probability.
	sum := make([]float64, len(r.Holes)+1)
	cnt := make([]float64, len(r.Holes)+1)
	for v, l := range r.HoleLabels.Data {
		if l > 0 {
			w := float64(occ[v])
			sum[int(l)] += w * o.pf[v]
			cnt[int(l)] += w
		}
	}
	for h := range r.Holes {
		if cnt[h+1] == 0 {
			continue
		}
		p := sum[h+1] / cnt[h+1]
		r.Holes[h].MeanProbability = opt(p)
		if p <= ProbabilityCertain {
			r.Holes[h].Certainty = "certain"
		} else {
			r.Holes[h].Certainty = "uncertain"
		}
	}
}

// uncertainty runs (or reuses) the Monte Carlo trials and returns the
// percentiles of the covered fraction, the probability map and the lethal
// probability of the target voxels. It reads only the session and dc, so
// it may run beside the rest of Analyze.
func (s *Session) uncertainty(ctx context.Context, set Settings, dc *doseCache) (*mcOutcome, error) {
	out := &mcOutcome{}
	var series []*dosemap.TemperatureSeries
	var noisy []int   // included sonications with thermometry noise on the session's grid
	var stacked []int // included sonications with the noise of their own stacks (mcstacks.go)
	var fixed []int   // included sonications without thermometry noise
	for _, n := range dc.included {
		if ts, ok := s.sons[n].series.(*dosemap.TemperatureSeries); ok && ts != nil {
			series = append(series, ts)
			noisy = append(noisy, n)
		} else if len(s.sons[n].noise) > 0 {
			stacked = append(stacked, n)
		} else {
			fixed = append(fixed, n)
		}
	}
	if len(series) == 0 && len(stacked) == 0 {
		out.warnings = append(out.warnings, "no included sonication has thermometry with a noise estimate; Monte Carlo uncertainty not computed")
		return out, nil
	}
	// at maps a thermometry voxel to its index in the kept series.
	at := func(n int) int { return n }
	var ids []int // coarse voxel of each kept voxel, for the noise streams
	if s.keep != nil {
		at, ids = s.keep.index, s.keep.ids
	}
	if len(fixed) > 0 {
		out.warnings = append(out.warnings, fmt.Sprintf("%d included sonication(s) enter the Monte Carlo trials without noise (ready dose maps or temperature maps)", len(fixed)))
	}
	g, cg := s.fg.fine, s.fg.coarse
	cl := cg.Len()
	cs := cg.SliceLen()
	key := dc.key + "|" + dc.monKey + "|" + strconv.FormatFloat(set.MarginMM, 'g', -1, 64) + "|" + strconv.Itoa(set.Trials) + "|" + strconv.FormatUint(set.Seed, 10)
	mc := s.mcCache
	if mc == nil || mc.key != key {
		mc = &mcCache{key: key, slot: make([]int32, cl), trials: make([][]float32, set.Trials)}
		for n := range mc.slot {
			mc.slot[n] = -1
		}
	}
	if mc.region == nil {
		// Coarse voxels whose stencil reaches a fine voxel of the target
		// or its margin.
		cmask := make([]bool, cl)
		mm := float32(set.MarginMM)
		for v, d := range s.dist {
			if d > mm && s.occ[v] == 0 {
				continue
			}
			fi, fj, f := g.IJK(v)
			st := &s.fg.slices[f]
			c := s.fg.coarseIndex(fi, fj)
			if !st.valid || c < 0 {
				continue
			}
			for a := 0; a < 4; a++ {
				cmask[st.k[a]*cs+c] = true
			}
		}
		mc.region = []int{}
		for n, m := range cmask {
			if m {
				mc.region = append(mc.region, n)
			}
		}
	}
	region := mc.region
	m := set.doseModel()
	if len(stacked) > 0 && mc.stk == nil {
		mc.stk = s.newStackTaps(region, stacked, m)
	}
	// Noiseless trial dose of the region (the noisy and the fixed part,
	// added as the trials add them), its bounds (threshold-independent,
	// kept with the trials) and the largest change of its log-dose.
	thr := float32(set.Threshold)
	lt := float32(math.Log(set.Threshold))
	nominal := make([]float32, cl)
	lnF := make([]float32, cl)
	nan := float32(math.NaN())
	prune := !s.exhaustiveMC && len(region) > 0
	if prune && !mc.boundsOK && len(series) == 0 {
		mc.lo, mc.hi = make([]float32, len(region)), make([]float32, len(region))
		for q := range region {
			mc.lo[q], mc.hi[q] = nan, nan
		}
	} else if prune && !mc.boundsOK {
		sr := make([]int, len(region))
		for q, n := range region {
			if sr[q] = at(n); sr[q] < 0 {
				return nil, fmt.Errorf("internal error: Monte Carlo voxel %d outside the kept thermometry", n)
			}
		}
		var wg sync.WaitGroup
		wg.Add(1)
		go func() {
			defer wg.Done()
			mc.lo = boxDose(series, set.doseModel(), sr, -mcSkipSigmas)
		}()
		mc.hi = boxDose(series, set.doseModel(), sr, mcSkipSigmas)
		wg.Wait()
	}
	if prune && !mc.boundsOK {
		if mc.stk != nil {
			mc.stk.bounds(m, mc.lo, mc.hi)
		}
		mc.boundsOK = true
	}
	dLo, dHi := mc.lo, mc.hi
	const certain, lethalAlways = 1, 2
	state := make([]uint8, cl) // 0 uncertain, else certain (and lethal)
	need := make([]bool, cl)
	for q, n := range region {
		dn := nan
		for _, sn := range noisy {
			if y := s.sons[sn].dose[n]; y == y {
				if dn != dn {
					dn = 0
				}
				dn += y
			}
		}
		for _, sn := range stacked {
			if y := s.sons[sn].dose[n]; y == y {
				if dn != dn {
					dn = 0
				}
				dn += y
			}
		}
		df := float32(0)
		hasFix := false
		for _, sn := range fixed {
			if y := s.sons[sn].dose[n]; y == y {
				df += y
				hasFix = true
			}
		}
		x := dn
		if hasFix {
			if x != x {
				x = 0
			}
			x += df
		}
		nominal[n] = x
		if !prune {
			need[n] = true
			continue
		}
		switch {
		case x != x:
			state[n] = certain // NaN in every trial
		case dn != dn:
			state[n] = certain // no noisy sonication measured it
		default:
			lo, hi := float64(df), float64(df)
			if y := dLo[q]; y == y {
				lo += float64(y)
			}
			if y := dHi[q]; y == y {
				hi += float64(y)
			}
			lx := float64(logDose(x))
			lnF[n] = float32(math.Max(float64(logDose(float32(hi)))-lx, lx-float64(logDose(float32(lo)))))
			switch {
			case lo >= float64(thr)*(1+1e-4):
				state[n] = certain
			case hi < float64(thr)*(1-1e-4):
				state[n] = certain
			default:
				need[n] = true
			}
		}
		if state[n] == certain && x >= thr {
			state[n] = lethalAlways
		}
	}
	nomFull := make([]float32, cl) // noiseless trial log-dose on the coarse grid
	for n := range nomFull {
		nomFull[n] = logDose(0) // finite: cubic weights may be negative
	}
	meas := make([]bool, cl) // measured by an included sonication
	for _, n := range region {
		nomFull[n] = logDose(nominal[n])
		meas[n] = nominal[n] == nominal[n]
	}
	// Monitored fine target voxels, the stencil of each (as the analysis
	// interpolates it, see mcStencil) and which of them are uncertain.
	var tv []int
	var mv float64
	fstate := []uint8{}
	var sk []int32 // per target voxel, 4 coarse taps (unused ones weigh 0)
	var sw []float32
	for v, o := range s.occ {
		if !(o > 0 && dc.monFine[v]) {
			continue
		}
		tv = append(tv, v)
		mv += float64(o)
		var k [4]int
		var w [4]float32
		if s.fg.mcStencil(v, meas, &k, &w) {
			for a := range k {
				sk, sw = append(sk, int32(k[a])), append(sw, w[a])
			}
		} else {
			sk, sw = append(sk, 0, 0, 0, 0), append(sw, 0, 0, 0, 0)
		}
		if !prune {
			fstate = append(fstate, 0)
			continue
		}
		nf := stencilLog(nomFull, sk[len(sk)-4:], sw[len(sw)-4:])
		var b float32 = 1e-3 // float32 rounding
		for a := 0; a < 4; a++ {
			if w[a] != 0 {
				b += float32(math.Abs(float64(w[a]))) * lnF[k[a]]
			}
		}
		switch {
		case nf-b >= lt:
			fstate = append(fstate, lethalAlways)
		case nf+b < lt:
			fstate = append(fstate, certain)
		default:
			fstate = append(fstate, 0)
			for a := 0; a < 4; a++ {
				if w[a] != 0 {
					need[k[a]] = true
				}
			}
		}
	}
	// Simulate the needed voxels not computed yet.
	var missing []bool
	if len(series) > 0 {
		missing = make([]bool, series[0].Geometry.Len())
	}
	var add []int
	for n, x := range need {
		if x && mc.slot[n] < 0 {
			if missing != nil {
				m := at(n)
				if m < 0 {
					return nil, fmt.Errorf("internal error: Monte Carlo voxel %d outside the kept thermometry", n)
				}
				missing[m] = true
			}
			add = append(add, n)
		}
	}
	if len(add) > 0 {
		var extra [][]float32 // per trial, the stacked sonications' dose at add
		var err error
		if mc.stk != nil {
			extra, err = mc.stk.trials(ctx, s, set, add)
		}
		fill := func(trial int, dose []float32) {
			row := mc.trials[trial]
			for a, n := range add {
				x := nan
				if dose != nil {
					x = dose[at(n)]
				}
				for _, sn := range fixed {
					if y := s.sons[sn].dose[n]; y == y {
						if x != x {
							x = 0
						}
						x += y
					}
				}
				if extra != nil {
					x = nanAdd(x, extra[trial][a])
				}
				row = append(row, x)
			}
			mc.trials[trial] = row
		}
		switch {
		case err != nil:
		case len(series) > 0:
			err = dosemap.MonteCarloVoxels(series, m, missing, ids, set.Trials, set.Seed, fill)
		default:
			for trial := range mc.trials {
				fill(trial, nil)
			}
		}
		if err != nil {
			for t := range mc.trials {
				mc.trials[t] = mc.trials[t][:min(len(mc.trials[t]), len(mc.idx))]
			}
			return nil, fmt.Errorf("Monte Carlo: %w", err)
		}
		// The new columns are complete: record them before anything can
		// return, so the cache stays consistent.
		for _, n := range add {
			mc.slot[n] = int32(len(mc.idx))
			mc.idx = append(mc.idx, n)
		}
	}
	s.mcCache = mc
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	// Per trial: covered fraction, and lethal counts per fine target voxel
	// and per coarse voxel.
	full := slices.Clone(nomFull) // trial log-dose on the whole coarse grid
	hits := make([]int, len(tv))
	chits := make([]int, cl)
	var sure float64 // target volume lethal in every trial
	for a, v := range tv {
		if fstate[a] == lethalAlways {
			sure += float64(s.occ[v])
		}
	}
	fr := make([]float64, 0, len(mc.trials))
	for _, tr := range mc.trials {
		for q, n := range mc.idx {
			full[n] = logDose(tr[q])
			if tr[q] >= thr {
				chits[n]++
			}
		}
		cov := sure
		for a, v := range tv {
			if fstate[a] == 0 && stencilLog(full, sk[4*a:4*a+4], sw[4*a:4*a+4]) >= lt {
				hits[a]++
				cov += float64(s.occ[v])
			}
		}
		if mv > 0 {
			fr = append(fr, cov/mv)
		}
	}
	nt := len(mc.trials)
	for a := range tv {
		if fstate[a] == lethalAlways {
			hits[a] = nt
		}
	}
	if len(fr) > 0 {
		sort.Float64s(fr)
		out.p05 = opt(quantile(fr, 0.05))
		out.p95 = opt(quantile(fr, 0.95))
	}
	out.trials = nt
	prob := dosemap.NewVolume(cg).Fill(nan)
	for _, n := range region {
		h := chits[n]
		if mc.slot[n] < 0 && state[n] == lethalAlways {
			h = nt
		}
		prob.Data[n] = float32(float64(h) / float64(nt))
	}
	out.prob = prob
	out.pf = make(map[int]float64, len(tv))
	for a, v := range tv {
		out.pf[v] = float64(hits[a]) / float64(nt)
	}
	return out, nil
}

// boxDose returns, for the region voxels, the summed dose of the series
// with every noisy frame temperature (Sigma known, value valid) moved by
// k·Sigma: the bound of a trial's dose when no frame error exceeds
// |k|·Sigma (see mcSkipSigmas). NaN where no series measured the voxel.
func boxDose(series []*dosemap.TemperatureSeries, m dosemap.DoseModel, region []int, k float64) []float32 {
	out := make([]float32, len(region))
	nan := float32(math.NaN())
	for q := range out {
		out[q] = nan
	}
	g := dosemap.NewAxialGeometry(len(region), 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})
	for _, ts := range series {
		sh := &dosemap.TemperatureSeries{Geometry: g, Times: ts.Times, Frames: make([][]float32, len(ts.Frames))}
		for f, fr := range ts.Frames {
			c := make([]float32, len(region))
			for q, n := range region {
				v := fr[n]
				if ts.Sigma != nil && v == v {
					if sg := float64(ts.Sigma[n]); sg > 0 && !math.IsInf(sg, 0) {
						v = float32(float64(v) + k*sg)
					}
				}
				c[q] = v
			}
			sh.Frames[f] = c
		}
		for q, y := range m.Dose(sh).Data {
			if y == y {
				if out[q] != out[q] {
					out[q] = 0
				}
				out[q] += y
			}
		}
	}
	return out
}

// quantile returns the p-quantile of sorted x by linear interpolation
// between order statistics (Hyndman & Fan 1996, definition 7).
func quantile(x []float64, p float64) float64 {
	if len(x) == 1 {
		return x[0]
	}
	h := p * float64(len(x)-1)
	lo := int(math.Floor(h))
	if lo >= len(x)-1 {
		return x[len(x)-1]
	}
	return x[lo] + (h-float64(lo))*(x[lo+1]-x[lo])
}

// baselineFrames returns the number of baseline frames the thermometry
// settings o use.
func baselineFrames(o ThermometrySettings) int {
	if o.BaselineFrames > 0 {
		return o.BaselineFrames
	}
	return dosemap.DefaultThermometryOptions().BaselineFrames
}

// addOffset adds off (per voxel, NaN for none) to every finite temperature
// of ts. Frames ts does not own (a temperature-map series passed through)
// are copied first, so the case's own frames are never changed.
func addOffset(ts *dosemap.TemperatureSeries, off []float32) {
	if !ts.Owned() {
		own := make([][]float32, len(ts.Frames))
		for f, fr := range ts.Frames {
			own[f] = slices.Clone(fr)
		}
		ts.Frames = own
	}
	for _, fr := range ts.Frames {
		for v, x := range fr {
			if o := off[v]; x == x && o == o {
				fr[v] = x + o
			}
		}
	}
}

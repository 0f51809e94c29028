package dosemap

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"sync/atomic"
)

// MonteCarlo propagates thermometry noise into dose. Sigma of a series is
// the noise of a temperature difference between a frame and the baseline
// (see PRF.NoiseSigma: √2 times the noise of one image), so each trial
// draws, per voxel, one baseline error shared by all frames of the series
// and an independent error per frame, each of standard deviation Sigma/√2:
//
//	T' = T + (Sigma/√2)·(Z_baseline + Z_frame),  Z standard normal,
//
// which gives every frame the noise Sigma and frames the correlation ½
// they have through their common baseline. A voxel of unknown Sigma gets
// no noise. The dose of each series is computed with m and the doses add
// up as in SumDose. fn receives each trial's cumulative dose: Len()
// values, NaN outside mask; the slice is reused and valid only during the
// call. A nil mask means every voxel; only masked voxels are computed.
//
// A series whose dose at a voxel, with every frame raised by
// FreezeSigmas·Sigma, exceeds its noiseless dose there by no more than
// FreezeRatio of the voxel's noiseless total (all series) enters that
// voxel's trials without noise: its noise cannot move the total by more
// than that short of a 5σ event, and in a long session most sonications
// lie far from most voxels near the lethal edge (in a typical session of
// 24 sonications, about one in five series remains noisy there).
//
// Voxel v of trial n draws its noise, series after series (baseline, then
// the valid frames in order; none for a series it enters without noise),
// from rand.NewPCG(seed, n<<32|v): a voxel's
// result depends neither on how many trials run nor on which other voxels
// the mask holds, so a computation restricted to fewer voxels gives the
// same numbers for them. The masked voxels are computed on GOMAXPROCS
// goroutines. The series must share one grid.
func MonteCarlo(series []*TemperatureSeries, m DoseModel, mask []bool, trials int, seed uint64, fn func(trial int, dose []float32)) error {
	return MonteCarloVoxels(series, m, mask, nil, trials, seed, fn)
}

// MonteCarloVoxels is MonteCarlo for series cut out of a larger grid:
// voxel v of the series draws the noise of voxel ids[v] of that grid (ids
// holds one index per voxel of the series; nil: v itself), so a
// computation on the cut-out gives the numbers of the whole grid for its
// voxels.
func MonteCarloVoxels(series []*TemperatureSeries, m DoseModel, mask []bool, ids []int, trials int, seed uint64, fn func(trial int, dose []float32)) error {
	if len(series) == 0 {
		return errors.New("Monte Carlo: no temperature series")
	}
	if m == nil {
		return errors.New("Monte Carlo: no dose model")
	}
	if trials < 1 {
		return fmt.Errorf("Monte Carlo: %d trials; need at least 1", trials)
	}
	g := series[0].Geometry
	nv := g.Len()
	if mask != nil && len(mask) != nv {
		return fmt.Errorf("Monte Carlo: mask holds %d values for %d voxels", len(mask), nv)
	}
	for n, ts := range series {
		if ts == nil {
			return fmt.Errorf("Monte Carlo: temperature series %d is missing", n+1)
		}
		if !ts.Geometry.SameGrid(g, gridTolerance) {
			return fmt.Errorf("Monte Carlo: temperature series %d (%v) is not on the grid of series 1 (%v)", n+1, ts.Geometry, g)
		}
		if len(ts.Times) != len(ts.Frames) {
			return fmt.Errorf("Monte Carlo: series %d has %d times for %d frames", n+1, len(ts.Times), len(ts.Frames))
		}
		if ts.Sigma != nil && len(ts.Sigma) != nv {
			return fmt.Errorf("Monte Carlo: series %d has %d noise values for %d voxels", n+1, len(ts.Sigma), nv)
		}
		for f, fr := range ts.Frames {
			if len(fr) != nv {
				return fmt.Errorf("Monte Carlo: series %d frame %d holds %d values for %d voxels", n+1, f+1, len(fr), nv)
			}
		}
	}
	var idx []int
	for n := 0; n < nv; n++ {
		if mask == nil || mask[n] {
			idx = append(idx, n)
		}
	}
	if nv >= 1<<32 {
		return fmt.Errorf("Monte Carlo: %d voxels; at most 2^32 supported", nv)
	}
	if ids != nil && len(ids) != nv {
		return fmt.Errorf("Monte Carlo: %d voxel numbers for %d voxels", len(ids), nv)
	}
	sid := idx // the noise stream of each masked voxel
	if ids != nil {
		sid = make([]int, len(idx))
		for q, n := range idx {
			if sid[q] = ids[n]; sid[q] < 0 || sid[q] >= 1<<32 {
				return fmt.Errorf("Monte Carlo: voxel number %d out of range", sid[q])
			}
		}
	}
	dose := nanSlice(nv)
	rm, fast := m.(rateModel)
	if !fast {
		return monteCarloSlow(series, m, idx, sid, trials, seed, dose, fn)
	}
	// Gather the masked voxels once: per series, frames and sigma.
	ps := make([]mcPacked, len(series))
	for s, ts := range series {
		p := mcPacked{times: ts.Times, sigma: make([]float32, len(idx)), frames: make([][]float32, len(ts.Frames))}
		for q, n := range idx {
			p.sigma[q] = noiseSigma(ts, n)
		}
		for f, fr := range ts.Frames {
			c := make([]float32, len(idx))
			for q, n := range idx {
				c[q] = fr[n]
			}
			p.frames[f] = c
		}
		ps[s] = p
	}
	fz := freezeFast(rm, ps, len(idx))
	// Work is split into chunks of voxels, shared among the workers; each
	// worker runs a whole batch of trials on a chunk, so the goroutines
	// meet once per batch, not once per trial (on a loaded machine waking
	// a thread can take milliseconds). A batch holds at most 2^24 values.
	const mcChunk = 256
	nchunks := (len(idx) + mcChunk - 1) / mcChunk
	workers := min(runtime.GOMAXPROCS(0), nchunks)
	ws := make([]*mcWorker, workers)
	for w := range ws {
		ws[w] = newMCWorker(rm, mcChunk)
	}
	batch := max(1, min(trials, (1<<24)/max(len(idx), 1)))
	res := make([][]float32, batch)
	for b := range res {
		res[b] = make([]float32, len(idx))
	}
	for t0 := 0; t0 < trials; t0 += batch {
		t1 := min(t0+batch, trials)
		var next atomic.Int64
		var wg sync.WaitGroup
		for _, w := range ws {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for {
					c := int(next.Add(1)) - 1
					if c >= nchunks {
						return
					}
					lo, hi := c*mcChunk, min((c+1)*mcChunk, len(idx))
					for trial := t0; trial < t1; trial++ {
						w.run(ps, fz, sid, lo, hi, seed, uint64(trial), res[trial-t0][lo:hi])
					}
				}
			}()
		}
		wg.Wait()
		for trial := t0; trial < t1; trial++ {
			for q, n := range idx {
				dose[n] = res[trial-t0][q]
			}
			fn(trial, dose)
		}
	}
	return nil
}

// noiseSigma is the standard deviation of each of the two normal draws of
// voxel n of ts (Sigma/√2), 0 when unknown.
func noiseSigma(ts *TemperatureSeries, n int) float32 {
	if ts.Sigma != nil {
		if v := ts.Sigma[n]; v > 0 && !math.IsInf(float64(v), 0) {
			return v / math.Sqrt2
		}
	}
	return 0
}

// noiseStream returns the generator of voxel v in trial n (see MonteCarlo).
func noiseStream(src *rand.PCG, seed, trial uint64, v int) {
	src.Seed(seed, trial<<32|uint64(v))
}

// mcPacked is one series restricted to the masked voxels.
type mcPacked struct {
	frames [][]float32
	sigma  []float32
	times  []float64
}

// FreezeSigmas and FreezeRatio decide which series enter a voxel's Monte
// Carlo trials without noise (see MonteCarlo).
const (
	FreezeSigmas = 5
	FreezeRatio  = 1e-4
)

// frozen says, per series and masked voxel, which series enter the trials
// without noise; fixed is the total noiseless dose of those series per
// voxel (summed as SumDose does), fixedGot whether any of them measured
// the voxel.
type frozen struct {
	off      [][]bool
	fixed    []float64
	fixedGot []bool
}

// freeze decides from the noiseless doses nom and the raised doses hi of
// each series at the masked voxels (sigma per series, 0: no noise).
func freeze(nom, hi, sigma [][]float32, n int) *frozen {
	fz := &frozen{off: make([][]bool, len(nom)), fixed: make([]float64, n), fixedGot: make([]bool, n)}
	total := make([]float64, n)
	for _, d := range nom {
		for q, x := range d {
			if x == x {
				total[q] += float64(x)
			}
		}
	}
	for s := range nom {
		off := make([]bool, n)
		for q := range off {
			x := nom[s][q]
			off[q] = sigma[s][q] == 0 || x != x || !(float64(hi[s][q]-x) > FreezeRatio*total[q])
			if off[q] && x == x {
				fz.fixed[q] += float64(x)
				fz.fixedGot[q] = true
			}
		}
		fz.off[s] = off
	}
	return fz
}

// freezeFast computes the noiseless and raised doses of the packed series
// and decides with freeze.
func freezeFast(rm rateModel, ps []mcPacked, n int) *frozen {
	a := newAccumulator(rm, n, nil)
	buf := make([]float32, n)
	nom, hi, sig := make([][]float32, len(ps)), make([][]float32, len(ps)), make([][]float32, len(ps))
	for s, p := range ps {
		for pass := 0; pass < 2; pass++ {
			a.reset()
			a.start()
			for f, fr := range p.frames {
				for q, v := range fr {
					if sg := p.sigma[q]; pass == 1 && sg != 0 && v == v {
						v += FreezeSigmas * math.Sqrt2 * sg // sg is Sigma/√2
					}
					buf[q] = v
				}
				a.add(buf, p.times[f])
			}
			out := make([]float32, n)
			a.result(out)
			if pass == 0 {
				nom[s] = out
			} else {
				hi[s] = out
			}
		}
		sig[s] = p.sigma
	}
	return freeze(nom, hi, sig, n)
}

// mcWorker holds one goroutine's buffers.
type mcWorker struct {
	acc           *accumulator
	src           []rand.PCG
	rng           []*rand.Rand
	noisy, shared []float32
	res           []float32
	act           []int
	tot           []float64
	got           []bool
}

func newMCWorker(rm rateModel, n int) *mcWorker {
	w := &mcWorker{acc: newAccumulator(rm, n, nil), src: make([]rand.PCG, n), rng: make([]*rand.Rand, n),
		noisy: make([]float32, n), shared: make([]float32, n), res: make([]float32, n), act: make([]int, 0, n),
		tot: make([]float64, n), got: make([]bool, n)}
	for q := range w.rng {
		w.rng[q] = rand.New(&w.src[q])
	}
	return w
}

// run computes the trial dose of the packed voxels lo..hi-1 into out: the
// fixed dose of the series entering without noise, plus the noisy dose of
// the others, series by series over the voxels where they are noisy.
func (w *mcWorker) run(ps []mcPacked, fz *frozen, sid []int, lo, hi int, seed, trial uint64, out []float32) {
	n := hi - lo
	acc := w.acc
	full := cap(acc.acc)
	defer func() {
		acc.acc, acc.prev, acc.missing, acc.got = acc.acc[:full], acc.prev[:full], acc.missing[:full], acc.got[:full]
	}()
	rng := w.rng[:n]
	for q := range rng {
		noiseStream(&w.src[q], seed, trial, sid[lo+q])
	}
	tot, got := w.tot[:n], w.got[:n]
	copy(tot, fz.fixed[lo:hi])
	copy(got, fz.fixedGot[lo:hi])
	noisy, shared, res := w.noisy, w.shared[:n], w.res
	for s, p := range ps {
		off := fz.off[s][lo:hi]
		act := w.act[:0]
		for q, o := range off {
			if !o {
				act = append(act, q)
			}
		}
		if len(act) == 0 {
			continue
		}
		m := len(act)
		acc.acc, acc.prev, acc.missing, acc.got = acc.acc[:m], acc.prev[:m], acc.missing[:m], acc.got[:m]
		acc.reset()
		acc.start()
		sigma := p.sigma[lo:hi]
		for _, q := range act {
			shared[q] = float32(rng[q].NormFloat64())
		}
		nz := noisy[:m]
		for f, fr := range p.frames {
			frc := fr[lo:hi]
			for i, q := range act {
				v := frc[q]
				if v == v {
					v += sigma[q] * (shared[q] + float32(rng[q].NormFloat64()))
				}
				nz[i] = v
			}
			acc.add(nz, p.times[f])
		}
		acc.result(res[:m])
		for i, q := range act {
			if d := res[i]; d == d {
				tot[q] += float64(d)
				got[q] = true
			}
		}
	}
	nan := float32(math.NaN())
	for q := range out[:n] {
		if got[q] {
			out[q] = float32(tot[q])
		} else {
			out[q] = nan
		}
	}
}

// monteCarloSlow serves dose models from outside the package: each trial
// builds noisy copies of the series and calls m.Dose. The noise is that of
// the fast path.
func monteCarloSlow(series []*TemperatureSeries, m DoseModel, idx, sid []int, trials int, seed uint64, dose []float32, fn func(int, []float32)) error {
	copies := make([]*TemperatureSeries, len(series))
	for s, ts := range series {
		c := *ts
		c.Frames = make([][]float32, len(ts.Frames))
		for f := range c.Frames {
			c.Frames[f] = make([]float32, len(ts.Frames[f]))
		}
		copies[s] = &c
	}
	// Which series enter each voxel without noise, as in the fast path.
	nom, hi, sig := make([][]float32, len(series)), make([][]float32, len(series)), make([][]float32, len(series))
	for s, ts := range series {
		raised := *ts
		raised.Frames = make([][]float32, len(ts.Frames))
		for f, fr := range ts.Frames {
			r := append([]float32(nil), fr...)
			for _, n := range idx {
				if sg := noiseSigma(ts, n); sg != 0 && r[n] == r[n] {
					r[n] += FreezeSigmas * math.Sqrt2 * sg
				}
			}
			raised.Frames[f] = r
		}
		dn, dh := m.Dose(ts), m.Dose(&raised)
		nom[s], hi[s], sig[s] = make([]float32, len(idx)), make([]float32, len(idx)), make([]float32, len(idx))
		for q, n := range idx {
			nom[s][q], hi[s][q], sig[s][q] = dn.Data[n], dh.Data[n], noiseSigma(ts, n)
		}
	}
	fz := freeze(nom, hi, sig, len(idx))
	shared := make([]float32, len(idx))
	src := make([]rand.PCG, len(idx))
	rng := make([]*rand.Rand, len(idx))
	for q := range rng {
		rng[q] = rand.New(&src[q])
	}
	for trial := 0; trial < trials; trial++ {
		for q := range idx {
			noiseStream(&src[q], seed, uint64(trial), sid[q])
		}
		maps := make([]*DoseMap, len(series))
		for s, ts := range series {
			c := copies[s]
			off := fz.off[s]
			for q := range idx {
				if !off[q] {
					shared[q] = float32(rng[q].NormFloat64())
				}
			}
			for f, fr := range ts.Frames {
				copy(c.Frames[f], fr)
				for q, n := range idx {
					v := fr[n]
					if sg := noiseSigma(ts, n); !off[q] && v == v {
						v += sg * (shared[q] + float32(rng[q].NormFloat64()))
					}
					c.Frames[f][n] = v
				}
			}
			maps[s] = m.Dose(c)
		}
		sum, err := SumDose(maps...)
		if err != nil {
			return fmt.Errorf("Monte Carlo: %w", err)
		}
		for _, n := range idx {
			dose[n] = sum.Data[n]
		}
		fn(trial, dose)
	}
	return nil
}

// LethalProbability returns, per masked voxel, the fraction of Monte Carlo
// trials (see MonteCarlo) whose cumulative dose reaches threshold. Voxels
// outside mask, and voxels whose dose is NaN in every trial, are NaN.
func LethalProbability(series []*TemperatureSeries, m DoseModel, threshold float64, mask []bool, trials int, seed uint64) (*Volume, error) {
	if len(series) == 0 || series[0] == nil {
		return nil, errors.New("lethal probability: no temperature series")
	}
	g := series[0].Geometry
	hits := make([]int32, g.Len())
	seen := make([]bool, g.Len())
	err := MonteCarlo(series, m, mask, trials, seed, func(_ int, dose []float32) {
		for n, d := range dose {
			if d == d {
				seen[n] = true
				if float64(d) >= threshold {
					hits[n]++
				}
			}
		}
	})
	if err != nil {
		return nil, err
	}
	v := NewVolume(g)
	nan := float32(math.NaN())
	for n := range v.Data {
		if seen[n] {
			v.Data[n] = float32(hits[n]) / float32(trials)
		} else {
			v.Data[n] = nan
		}
	}
	return v, nil
}

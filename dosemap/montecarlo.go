package dosemap

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
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
// Trial n draws its noise from rand.NewPCG(seed, n), so a trial's result
// does not depend on how many trials run. The series must share one grid.
func MonteCarlo(series []*TemperatureSeries, m DoseModel, mask []bool, trials int, seed uint64, fn func(trial int, dose []float32)) error {
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
	dose := nanSlice(nv)
	rm, fast := m.(rateModel)
	if !fast {
		return monteCarloSlow(series, m, idx, trials, seed, dose, fn)
	}
	// Gather the masked voxels once: per series, frames and sigma.
	type packed struct {
		frames [][]float32
		sigma  []float32
		times  []float64
	}
	ps := make([]packed, len(series))
	for s, ts := range series {
		p := packed{times: ts.Times, sigma: make([]float32, len(idx)), frames: make([][]float32, len(ts.Frames))}
		for q, n := range idx {
			if ts.Sigma != nil {
				if v := ts.Sigma[n]; v > 0 && !math.IsInf(float64(v), 0) {
					p.sigma[q] = v / math.Sqrt2
				}
			}
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
	acc := newAccumulator(rm, len(idx))
	noisy := make([]float32, len(idx))
	res := make([]float32, len(idx))
	shared := make([]float32, len(idx))
	for trial := 0; trial < trials; trial++ {
		rng := rand.New(rand.NewPCG(seed, uint64(trial)))
		acc.reset()
		for _, p := range ps {
			acc.start()
			for q, sg := range p.sigma {
				if sg != 0 {
					shared[q] = float32(rng.NormFloat64())
				}
			}
			for f, fr := range p.frames {
				for q, v := range fr {
					if sg := p.sigma[q]; sg != 0 && v == v {
						v += sg * (shared[q] + float32(rng.NormFloat64()))
					}
					noisy[q] = v
				}
				acc.add(noisy, p.times[f])
			}
		}
		acc.result(res)
		for q, n := range idx {
			dose[n] = res[q]
		}
		fn(trial, dose)
	}
	return nil
}

// monteCarloSlow serves dose models from outside the package: each trial
// builds noisy copies of the series and calls m.Dose.
func monteCarloSlow(series []*TemperatureSeries, m DoseModel, idx []int, trials int, seed uint64, dose []float32, fn func(int, []float32)) error {
	copies := make([]*TemperatureSeries, len(series))
	for s, ts := range series {
		c := *ts
		c.Frames = make([][]float32, len(ts.Frames))
		for f := range c.Frames {
			c.Frames[f] = make([]float32, len(ts.Frames[f]))
		}
		copies[s] = &c
	}
	sigma := func(ts *TemperatureSeries, n int) float32 {
		if ts.Sigma != nil {
			if sg := ts.Sigma[n]; sg > 0 && !math.IsInf(float64(sg), 0) {
				return sg / math.Sqrt2
			}
		}
		return 0
	}
	shared := make([]float32, len(idx))
	for trial := 0; trial < trials; trial++ {
		rng := rand.New(rand.NewPCG(seed, uint64(trial)))
		maps := make([]*DoseMap, len(series))
		for s, ts := range series {
			c := copies[s]
			for q, n := range idx {
				if sigma(ts, n) != 0 {
					shared[q] = float32(rng.NormFloat64())
				}
			}
			for f, fr := range ts.Frames {
				copy(c.Frames[f], fr)
				for q, n := range idx {
					v := fr[n]
					if sg := sigma(ts, n); sg != 0 && v == v {
						v += sg * (shared[q] + float32(rng.NormFloat64()))
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

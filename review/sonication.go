package review

import (
	"context"
	"fmt"
	"math"
	"sort"
	"strconv"

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
// It returns the dose unit.
func prepareSonication(ctx context.Context, so *dosemap.Sonication, s Settings, ref dosemap.Geometry) (*sonData, string, error) {
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
		ts, err := dosemap.Thermometry(so, s.Thermometry)
		if err != nil {
			return nil, "", err
		}
		if err := ctx.Err(); err != nil {
			return nil, "", err
		}
		dm = m.Dose(ts)
		sd.temp = temperatureStats(ts.Geometry, ts.Times, ts.Frames)
		sd.quality = frameQuality(so.Number, ts.Quality)
		if ts.Geometry.SameGrid(ref, 0.01) {
			sd.series = ts
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
// next frame; the last frame for the interval before it).
func temperatureStats(g dosemap.Geometry, times []float64, frames [][]float32) *tempStats {
	t := &tempStats{peak: math.NaN(), peak3: math.NaN(), above43: math.NaN()}
	best := -1
	for _, fr := range frames {
		fbest, fv := -1, float32(math.Inf(-1))
		for v, x := range fr {
			if x == x && x > fv {
				fv, fbest = x, v
			}
		}
		if fbest < 0 {
			continue
		}
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
// on the threshold.
type mcCache struct {
	key    string
	idx    []int       // coarse voxels computed (target+margin region)
	trials [][]float32 // per trial, cumulative dose at idx
	noise  bool        // some included sonication had a noise estimate
}

// uncertainty runs (or reuses) the Monte Carlo trials and fills the
// percentiles of the covered fraction, the probability map and the hole
// certainty of r.
func (s *Session) uncertainty(ctx context.Context, r *Result, set Settings, dc *doseCache) error {
	var series []*dosemap.TemperatureSeries
	var fixed []int // included sonications without thermometry noise
	for _, n := range dc.included {
		if ts, ok := s.sons[n].series.(*dosemap.TemperatureSeries); ok && ts != nil {
			series = append(series, ts)
		} else {
			fixed = append(fixed, n)
		}
	}
	if len(series) == 0 {
		r.Warnings = append(r.Warnings, "no included sonication has thermometry with a noise estimate; Monte Carlo uncertainty not computed")
		return nil
	}
	if len(fixed) > 0 {
		r.Warnings = append(r.Warnings, fmt.Sprintf("%d included sonication(s) enter the Monte Carlo trials without noise (ready dose maps or resampled grids)", len(fixed)))
	}
	g, cg := s.fg.fine, s.fg.coarse
	key := dc.key + "|" + strconv.FormatFloat(set.MarginMM, 'g', -1, 64) + "|" + strconv.Itoa(set.Trials) + "|" + strconv.FormatUint(set.Seed, 10)
	mc := s.mcCache
	if mc == nil || mc.key != key {
		// Coarse voxels whose stencil reaches a fine voxel of the target
		// or its margin.
		cmask := make([]bool, cg.Len())
		cs := cg.SliceLen()
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
		mc = &mcCache{key: key}
		for n, m := range cmask {
			if m {
				mc.idx = append(mc.idx, n)
			}
		}
		err := dosemap.MonteCarlo(series, set.doseModel(), cmask, set.Trials, set.Seed, func(trial int, dose []float32) {
			out := make([]float32, len(mc.idx))
			for q, n := range mc.idx {
				x := dose[n]
				for _, sn := range fixed {
					if y := s.sons[sn].dose[n]; y == y {
						if x != x {
							x = 0
						}
						x += y
					}
				}
				out[q] = x
			}
			mc.trials = append(mc.trials, out)
		})
		if err != nil {
			return fmt.Errorf("Monte Carlo: %w", err)
		}
		if err := ctx.Err(); err != nil {
			return err
		}
		s.mcCache = mc
	}
	// Per trial: covered fraction, and lethal counts per fine target voxel
	// and per coarse voxel.
	thr := float32(set.Threshold)
	lt := float32(math.Log(set.Threshold))
	cl := cg.Len()
	full := make([]float32, cl) // trial log-dose on the whole coarse grid
	for n := range full {
		full[n] = logDose(0) // finite: cubic weights may be negative
	}
	var tv []int // monitored fine target voxels
	var mv float64
	for v, o := range s.occ {
		if o > 0 && dc.monFine[v] {
			tv = append(tv, v)
			mv += float64(o)
		}
	}
	hits := make([]int, len(tv))
	chits := make([]int, len(mc.idx))
	fr := make([]float64, 0, len(mc.trials))
	for _, tr := range mc.trials {
		for q, n := range mc.idx {
			full[n] = logDose(tr[q])
			if tr[q] >= thr {
				chits[q]++
			}
		}
		var cov float64
		for a, v := range tv {
			if s.fg.logAt(full, v) >= lt {
				hits[a]++
				cov += float64(s.occ[v])
			}
		}
		if mv > 0 {
			fr = append(fr, cov/mv)
		}
	}
	nt := float64(len(mc.trials))
	if len(fr) > 0 {
		sort.Float64s(fr)
		r.CoveredFractionP05 = opt(quantile(fr, 0.05))
		r.CoveredFractionP95 = opt(quantile(fr, 0.95))
	}
	r.Trials = len(mc.trials)
	prob := dosemap.NewVolume(cg).Fill(float32(math.NaN()))
	for q, n := range mc.idx {
		prob.Data[n] = float32(float64(chits[q]) / nt)
	}
	r.Probability = prob
	// Hole certainty from the fine-voxel lethal probability.
	pf := make(map[int]float64, len(tv))
	for a, v := range tv {
		pf[v] = float64(hits[a]) / nt
	}
	sum := make([]float64, len(r.Holes)+1)
	cnt := make([]float64, len(r.Holes)+1)
	for v, l := range r.HoleLabels.Data {
		if l > 0 {
			w := float64(s.occ[v])
			sum[int(l)] += w * pf[v]
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
	return nil
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

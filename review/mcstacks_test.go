package review

import (
	"context"
	"math"
	"sort"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
)

// loadPlanes writes the first n sonications of sim.PlanesSession(l, 1)
// and reads them back with the frames left in their files.
func loadPlanes(t *testing.T, l sim.Layout, n int) (*dosemap.Case, *sim.Truth) {
	t.Helper()
	dir := t.TempDir()
	s := sim.PlanesSession(l, 1)
	s.Sonications = s.Sonications[:n]
	truth, err := sim.WriteSession(dir, s)
	if err != nil {
		t.Fatal(err)
	}
	c, _, err := dicomio.Load(context.Background(), dir, dicomio.LoadOptions{Deferred: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	return c, truth
}

// TestMonteCarloTwoPlanes: on the simulated sessions measured on a
// coronal and a sagittal plane through each focus (in one series, and in
// one series per plane), every sonication enters the Monte Carlo with the
// noise of both its stacks:
//   - each sonication carries two stacks of noise and no sonication enters
//     without noise (no such warning);
//   - the stacks' noiseless doses, resampled and averaged as the trials
//     combine them (Geometry.Taps, stackTaps.combine), give the
//     sonication's dose of the deterministic path (Resample and the mean
//     of the stacks in prepareStacks) to float rounding (1e-4 relative);
//   - the 5th–95th percentile band of the covered fraction is not empty
//     (the noise moves the lethal edge);
//   - the mean covered fraction over the trials lies within 1 point of
//     the deterministic coverage, and the deterministic coverage within
//     the band widened by 1 point: at the simulated SNR (σ_T ≈ 0.3 °C
//     per frame) the noise moves the lethal isoline by a fraction of a
//     voxel, and its mean effect on the covered fraction is about the
//     trials' standard error plus the small upward bias of a dose convex
//     in temperature (common practice; the tolerance is a choice of this
//     check, about twice the band's width);
//   - with the stacks' noise set to zero, every trial gives the coverage
//     of the analysis exactly.
func TestMonteCarloTwoPlanes(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses two 35-sonication sessions")
	}
	for _, l := range []sim.Layout{sim.LayoutTwoPlanes, sim.LayoutTwoPlaneSeries} {
		t.Run(l.String(), func(t *testing.T) {
			c, _ := loadPlanes(t, l, 35)
			ctx := context.Background()
			set := DefaultSettings()
			ses, err := Prepare(ctx, c, set, nil)
			if err != nil {
				t.Fatal(err)
			}
			for _, sd := range ses.sons {
				if len(sd.noise) != 2 || sd.series != nil {
					t.Fatalf("sonication %d: %d stacks of noise (series %v); want 2", sd.number, len(sd.noise), sd.series != nil)
				}
			}
			// The combination of the trials, fed with the noiseless stack
			// doses, is the deterministic dose.
			cg := ses.fg.coarse
			var all []int
			for n := 0; n < cg.Len(); n++ {
				all = append(all, n)
			}
			m := set.doseModel()
			for _, sn := range []int{0, 17, 29} {
				st := ses.newStackTaps(all, []int{sn}, m)
				doses := make([][]float32, len(st.stacks))
				for a, sr := range st.stacks {
					doses[a] = m.Dose(sr.noise.ts).Data
				}
				bad, got := 0, 0
				for q, n := range all {
					x := st.combine(q, func(a int, tp int32) float32 { return doses[a][tp] })
					want := ses.sons[sn].dose[n]
					if x != x || want != want {
						if (x != x) != (want != want) {
							bad++
						}
						continue
					}
					got++
					if math.Abs(float64(x-want)) > 1e-4*math.Max(1, math.Abs(float64(want))) {
						bad++
					}
				}
				if bad > 0 || got == 0 {
					t.Errorf("sonication %d: %d of %d voxels differ from the deterministic dose", ses.sons[sn].number, bad, got)
				}
			}
			r, err := ses.Analyze(ctx, set, nil)
			if err != nil {
				t.Fatal(err)
			}
			for _, w := range r.Warnings {
				if strings.Contains(w, "without noise") || strings.Contains(w, "Monte Carlo uncertainty not computed") {
					t.Errorf("warning: %s", w)
				}
			}
			if r.Trials != set.Trials || r.CoveredFractionP05 == nil || r.CoveredFractionP95 == nil {
				t.Fatalf("%d trials, band %v–%v", r.Trials, r.CoveredFractionP05, r.CoveredFractionP95)
			}
			p05, p95 := *r.CoveredFractionP05, *r.CoveredFractionP95
			if !(p95 > p05) {
				t.Errorf("covered fraction band %.4f–%.4f: no spread", p05, p95)
			}
			// Mean over the trials: the lethal probability of each
			// monitored target voxel weighted by its occupancy.
			dc, err := ses.doses(ctx, set)
			if err != nil {
				t.Fatal(err)
			}
			out, err := ses.uncertainty(ctx, set, dc)
			if err != nil {
				t.Fatal(err)
			}
			var sum, w float64
			for v, p := range out.pf {
				sum += float64(ses.occ[v]) * p
				w += float64(ses.occ[v])
			}
			mean := sum / w
			t.Logf("%s: coverage %.4f, trials mean %.4f, p05 %.4f, p95 %.4f; %d voxels simulated", l, fracOf(r.CoveredFraction), mean, p05, p95, len(ses.mcCache.idx))
			if d := math.Abs(mean - fracOf(r.CoveredFraction)); d > 0.01 {
				t.Errorf("mean covered fraction of the trials %.4f, deterministic %.4f (difference %.4f > 0.01)", mean, fracOf(r.CoveredFraction), d)
			}
			if !(fracOf(r.CoveredFraction) >= p05-0.01 && fracOf(r.CoveredFraction) <= p95+0.01) {
				t.Errorf("deterministic coverage %.4f outside the band %.4f–%.4f widened by 1 point", fracOf(r.CoveredFraction), p05, p95)
			}
			// Without noise every trial gives the analysis's coverage: the
			// trials combine the stacks and interpolate onto the analysis
			// grid as the analysis does.
			for _, sd := range ses.sons {
				for _, nz := range sd.noise {
					clear(nz.ts.Sigma)
				}
			}
			ses.mcCache = nil
			quiet := set
			quiet.Seed = 99
			r0, err := ses.Analyze(ctx, quiet, nil)
			if err != nil {
				t.Fatal(err)
			}
			if *r0.CoveredFractionP05 != fracOf(r0.CoveredFraction) || *r0.CoveredFractionP95 != fracOf(r0.CoveredFraction) {
				t.Errorf("noiseless trials: band %.6f–%.6f, analysis %.6f", *r0.CoveredFractionP05, *r0.CoveredFractionP95, fracOf(r0.CoveredFraction))
			}
		})
	}
}

// TestStackNoiseEstimate: each stack of the first three sonications of
// the simulated two-plane-series session gets its own noise estimate, from its own baseline frames, that
// matches the simulator's noise: the simulator adds normal noise of
// standard deviation 1000/SNR to the real and imaginary parts of every
// image (sim.Protocol.SNR, truth.json "snr"), so a voxel of mean magnitude
// M has phase noise σ_φ = σ/M per image (Conturo & Smith, Magn Reson Med
// 1990;15:420) and a PRF temperature difference between two images the
// noise σ_T = √2·σ/(M·|γ·α·B0·TE|) (dosemap.PRF.NoiseSigma). Over the
// voxels of each stack with signal (mean baseline magnitude above half
// the gel's), the median of Sigma/σ_T lies within 10 % of 1: the
// estimate's median over about 9000 voxels of two-frame variances
// (chi-square with 1 degree of freedom) carries a few per cent of scatter
// (common practice). The magnitudes are stored as integers, so that
// median is quantised and comes out alike in every stack.
func TestStackNoiseEstimate(t *testing.T) {
	if testing.Short() {
		t.Skip("writes a simulated session")
	}
	c, truth := loadPlanes(t, sim.LayoutTwoPlaneSeries, 3)
	th := truth.Thermometry
	sigma := 1000 / th.SNR
	ppd := math.Abs(th.PhasePerDegree)
	opt := DefaultSettings().Thermometry
	for _, n := range []int{0, 1, 2} {
		so := c.Sonications[n]
		for p, st := range append([]*dosemap.Sonication{so}, so.Stacks...) {
			r, _, done, err := st.Resident(context.Background())
			if err != nil {
				t.Fatal(err)
			}
			ts, err := thermometry(r, opt)
			if err != nil {
				done()
				t.Fatal(err)
			}
			nb := baselineFrames(opt)
			var ratios []float64
			for v, s := range ts.Sigma {
				var mag float64
				for f := 0; f < nb; f++ {
					mag += float64(r.Magnitude[f][v]) / float64(nb)
				}
				if !(s > 0) || mag < 500 {
					continue
				}
				ratios = append(ratios, float64(s)/(math.Sqrt2*sigma/(mag*ppd)))
			}
			done()
			ts.Release()
			if len(ratios) < 1000 {
				t.Fatalf("sonication %d stack %d: %d voxels with signal", so.Number, p+1, len(ratios))
			}
			sort.Float64s(ratios)
			med := ratios[len(ratios)/2]
			t.Logf("sonication %d stack %d (%s): median Sigma/σ_T %.3f over %d voxels", so.Number, p+1, orientationName(st.Geometry), med, len(ratios))
			if math.Abs(med-1) > 0.1 {
				t.Errorf("sonication %d stack %d: median estimated/simulated noise %.3f, want 1 ± 0.1", so.Number, p+1, med)
			}
		}
	}
}

// fracOf is the covered fraction p points to, NaN when it is not
// measurable (so every comparison with it fails).
func fracOf(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

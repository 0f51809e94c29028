package review

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strings"
	"sync"

	"dosecover/dosemap"
)

// Residual heat from earlier sonications (dosemap.EstimateResidual): the
// estimate per sonication, its figures over the target and margin, the
// warning, and the optional correction (Settings.CarryOver).

// sessionClock returns each sonication's first-frame time in seconds from
// the first sonication's, or NaN for all with a note when an acquisition
// time is missing or the series overlap in time.
func sessionClock(sons []*dosemap.Sonication) ([]float64, string) {
	out := make([]float64, len(sons))
	nan := func(note string) ([]float64, string) {
		for n := range out {
			out[n] = math.NaN()
		}
		return out, note
	}
	if len(sons) < 2 {
		return out, ""
	}
	for n, so := range sons {
		if so.Start.IsZero() {
			return nan(fmt.Sprintf("sonication %d has no acquisition time: the heat left from earlier sonications is not estimated", so.Number))
		}
		out[n] = so.Start.Sub(sons[0].Start).Seconds()
		if n > 0 {
			prev := sons[n-1]
			end := out[n-1]
			if len(prev.Times) > 0 {
				end += prev.Times[len(prev.Times)-1]
			}
			if !(out[n] > end) {
				return nan(fmt.Sprintf("sonication %d starts before sonication %d ends: the heat left from earlier sonications is not estimated", so.Number, prev.Number))
			}
		}
	}
	return out, ""
}

// prepareResidual estimates the residual heat of every sonication from the
// cooling tails prepareSonication kept, and with s.CarryOver computes the
// dose of every sonication with residual heat again from its temperatures
// plus the estimate (the as-measured dose is kept beside it).
//
// The estimate is made only in the thermometry voxels within the box of
// the patient points ext (the target enlarged by the largest margin: the
// region the analysis grid covers); elsewhere it is NaN.
func (ses *Session) prepareResidual(ctx context.Context, c *dosemap.Case, s Settings, ref dosemap.Geometry, ext []vec3, progress ProgressFunc) error {
	tails := make([]*dosemap.CoolingTail, len(ses.sons))
	var masks []struct {
		g dosemap.Geometry
		m []bool
	}
	for n, sd := range ses.sons {
		tails[n], sd.tail = sd.tail, nil
		sd.cooling = math.NaN()
		if tails[n] == nil {
			continue
		}
		g := tails[n].Geometry
		for _, m := range masks {
			if m.g.SameGrid(g, 0.01) {
				tails[n].Mask = m.m
			}
		}
		if tails[n].Mask == nil {
			tails[n].Mask = boxMask(g, ext)
			masks = append(masks, struct {
				g dosemap.Geometry
				m []bool
			}{g, tails[n].Mask})
		}
	}
	est, err := dosemap.EstimateResidual(tails, dosemap.DefaultResidualOptions())
	if err != nil {
		return err
	}
	ses.grown.tails = tails // for AddSonication
	var todo []int
	for n, e := range est {
		sd := ses.sons[n]
		sd.cooling = e.CoolingS
		if e.Rise == nil {
			continue
		}
		sd.residual = onGrid(e.Rise, ref)
		if len(c.Sonications[n].Stacks) > 0 {
			continue // the correction follows one stack; a sonication of several keeps its measured dose
		}
		for _, x := range e.Rise.Data {
			if x > 0 {
				todo = append(todo, n)
				break
			}
		}
	}
	if !s.CarryOver || len(todo) == 0 {
		return nil
	}
	errs := make([]error, len(todo))
	redo := make([]*sonData, len(todo))
	var wg sync.WaitGroup
	var pmu sync.Mutex
	done := 0
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for a, n := range todo {
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer func() { <-sem; wg.Done() }()
			so := c.Sonications[n]
			redo[a], _, errs[a] = prepareSonication(ctx, so, s, ref, ses.keep, math.NaN(), est[n].Rise.Data)
			pmu.Lock()
			done++
			progress.report(fmt.Sprintf("dose with residual heat, sonication %d", so.Number), 0.8+0.15*float64(done)/float64(len(todo)))
			pmu.Unlock()
		}()
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return err
	}
	for a, n := range todo {
		if errs[a] != nil {
			return fmt.Errorf("sonication %d with residual heat: %w", c.Sonications[n].Number, errs[a])
		}
		sd := ses.sons[n]
		sd.measured, sd.dose, sd.peak = sd.dose, redo[a].dose, redo[a].peak
		sd.reach = newReach(ref, sd.dose)
		if redo[a].series != nil {
			sd.series, sd.source = redo[a].series, redo[a].source
		}
	}
	return nil
}

// marginRegion returns the thermometry voxels (session grid) holding an
// analysis voxel of the target or of the margin of marginMM around it.
func (s *Session) marginRegion(marginMM float64) []bool {
	cg := s.fg.coarse
	cs := cg.SliceLen()
	out := make([]bool, cg.Len())
	mm := float32(marginMM)
	g := s.fg.fine
	for v, d := range s.dist {
		if d > mm && s.occ[v] == 0 {
			continue
		}
		fi, fj, f := g.IJK(v)
		k := s.fg.coarseSlice(f)
		c := s.fg.coarseIndex(fi, fj)
		if k < 0 || c < 0 {
			continue
		}
		out[k*cs+c] = true
	}
	return out
}

// residualFigures fills the residual heat figures of r.Sonications (in the
// order of s.sons), warns of each sonication whose estimate over the target
// and margin exceeds set.ResidualWarnC, and with set.CarryOver measures
// the as-measured coverage beside the corrected one.
func (s *Session) residualFigures(r *Result, set Settings) {
	region := s.marginRegion(set.MarginMM)
	var over, unknown []string
	for n, sd := range s.sons {
		st := &r.Sonications[n]
		st.CoolingS = opt(sd.cooling)
		if sd.residual == nil {
			continue
		}
		peak, nan, seen := 0.0, 0, false
		for v, in := range region {
			if !in {
				continue
			}
			x := sd.residual[v]
			if x != x {
				nan++
				continue
			}
			seen = true
			peak = math.Max(peak, float64(x))
		}
		if seen {
			st.ResidualRiseC = opt(math.Round(peak*100) / 100)
			if peak > set.ResidualWarnC {
				over = append(over, fmt.Sprintf("%d (%.1f °C)", sd.number, peak))
			}
		}
		if nan > 0 && n > 0 {
			unknown = append(unknown, fmt.Sprint(sd.number))
		}
	}
	if len(over) > 0 {
		w := fmt.Sprintf("heat left from earlier sonications, estimated from their cooling, exceeds %g °C over the target and margin at the start of sonication(s) %s: the thermometry measures change from each baseline and does not see it, so their dose is underestimated",
			set.ResidualWarnC, strings.Join(over, ", "))
		if set.CarryOver {
			w += " (corrected for: carry-over is on)"
		} else {
			w += " (the carry-over setting corrects for it)"
		}
		r.Warnings = append(r.Warnings, w)
	}
	if len(unknown) > 0 {
		r.Warnings = append(r.Warnings, fmt.Sprintf("the residual heat estimate is unknown in part of the target and margin for sonication(s) %s (an earlier sonication did not measure it)", strings.Join(unknown, ", ")))
	}
	r.CarryOver = set.CarryOver
}

// asMeasured measures coverage and lethal dose outside the margin of the
// as-measured dose (without the residual heat correction), as Analyze
// measures them.
func (s *Session) asMeasured(ctx context.Context, set Settings) (*AsMeasured, error) {
	dc, err := s.doseSum(ctx, set, true)
	if err != nil {
		return nil, err
	}
	lt := float32(math.Log(set.Threshold))
	mm := float32(set.MarginMM)
	var tv, mv, cv float64
	out := 0
	for v, l := range dc.logFine {
		lethal := l == l && l >= lt
		if o := s.occ[v]; o > 0 {
			tv += float64(o)
			if dc.monFine[v] {
				mv += float64(o)
				if lethal {
					cv += float64(o)
				}
			}
		}
		if lethal && s.dist[v] > mm {
			out++
		}
	}
	am := &AsMeasured{OutsideMarginLethalML: float64(out) * s.fg.fine.VoxelVolume() / 1000}
	if tv > 0 {
		am.CoveredFractionOfTarget = cv / tv
	}
	if mv > 0 {
		am.CoveredFraction = opt(cv / mv)
	}
	return am, nil
}

// boxMask returns the voxels of g whose centre lies within one voxel
// diagonal of the bounding box of the points ext.
func boxMask(g dosemap.Geometry, ext []vec3) []bool {
	lo := vec3{math.Inf(1), math.Inf(1), math.Inf(1)}
	hi := vec3{math.Inf(-1), math.Inf(-1), math.Inf(-1)}
	for _, p := range ext {
		for a := 0; a < 3; a++ {
			lo[a], hi[a] = math.Min(lo[a], p[a]), math.Max(hi[a], p[a])
		}
	}
	d := g.Spacing.Norm()
	out := make([]bool, g.Len())
	for n := range out {
		p := g.Point(ijk(g, n))
		in := true
		for a := 0; a < 3; a++ {
			in = in && p[a] >= lo[a]-d && p[a] <= hi[a]+d
		}
		out[n] = in
	}
	return out
}

// Residual returns the estimated heat left from earlier sonications at the
// baseline of sonication number n (°C over body temperature, per voxel of
// ThermometryGrid; NaN where unknown or not estimated), or nil when there
// is no such sonication or no estimate for it. The estimated true
// temperature of its frames is the measured one plus this.
func (s *Session) Residual(n int) *dosemap.Volume {
	for _, sd := range s.sons {
		if sd.number == n && sd.residual != nil {
			return &dosemap.Volume{Geometry: s.fg.coarse, Data: slices.Clone(sd.residual)}
		}
	}
	return nil
}

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
	var masks []*dosemap.CoolingTail
	for n, sd := range ses.sons {
		tails[n], sd.tail = sd.tail, nil
		sd.cooling = math.NaN()
		if tails[n] != nil {
			maskTails(tails[n], &masks, ext)
		}
	}
	est, err := dosemap.EstimateResidual(tails, dosemap.DefaultResidualOptions())
	if err != nil {
		return err
	}
	ses.grown.tails = tails // for AddSonication
	var todo []int
	for n, e := range est {
		ses.sons[n].cooling = e.CoolingS
		if e.Rise != nil && hiddenHeat(e) {
			todo = append(todo, n)
		}
	}
	// The estimates on the session's grid, one sonication per processor
	// at a time (each resampling is independent of the others).
	var rg sync.WaitGroup
	next := make(chan int)
	for range min(runtime.GOMAXPROCS(0), len(est)) {
		rg.Add(1)
		go func() {
			defer rg.Done()
			for n := range next {
				ses.sons[n].residual = residualOnGrid(est[n], ref)
			}
		}()
	}
	for n, e := range est {
		if e.Rise != nil {
			next <- n
		}
	}
	close(next)
	rg.Wait()
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
			redo[a], errs[a] = withResidual(ctx, so, s, ref, ses.keep, est[n])
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
		ses.sons[n].takeCorrected(redo[a], ref)
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

// Residual heat of sonications measured on several stacks: each stack
// keeps its own cooling tail (its own grid and frame times), the tails go
// to dosemap.EstimateResidual together (CoolingTail.Stacks), and the
// estimate on each stack's grid is added to that stack's temperatures
// when the correction is on. On the session's grid the estimate is the
// mean of the stacks' where they overlap, as the dose is.

// stackClock returns the start of stack st of sonication so on the session
// clock, from the sonication's (clock) and the two acquisition times; NaN
// when clock is unknown.
func stackClock(so, st *dosemap.Sonication, clock float64) float64 {
	if clock != clock || so.Start.IsZero() || st.Start.IsZero() {
		return clock
	}
	return clock + st.Start.Sub(so.Start).Seconds()
}

// joinTails returns the first stack's tail carrying the further stacks'
// (in the order of the sonication's stacks), or nil when a stack has no
// tail: the estimate must know which stack each of its parts belongs to.
func joinTails(first *dosemap.CoolingTail, more []*dosemap.CoolingTail) *dosemap.CoolingTail {
	if first == nil || slices.Contains(more, nil) {
		return nil
	}
	first.Stacks = more
	return first
}

// stackOffset returns the residual heat correction of stack n (0: the
// first), nil for none.
func stackOffset(offsets [][]float32, n int) []float32 {
	if n < len(offsets) {
		return offsets[n]
	}
	return nil
}

// maskTails sets the Mask of tl and its stacks to the voxels of their grids
// near the patient box ext, sharing the masks of grids met before (masks).
func maskTails(tl *dosemap.CoolingTail, masks *[]*dosemap.CoolingTail, ext []vec3) {
	for _, t := range append([]*dosemap.CoolingTail{tl}, tl.Stacks...) {
		for _, m := range *masks {
			if m.Geometry.SameGrid(t.Geometry, 0.01) {
				t.Mask = m.Mask
				break
			}
		}
		if t.Mask == nil {
			t.Mask = boxMask(t.Geometry, ext)
			*masks = append(*masks, t)
		}
	}
}

// residualOnGrid returns the estimate e on grid ref: the first stack's
// resampled, or with several stacks the mean of those known at each voxel
// (NaN where none is).
func residualOnGrid(e dosemap.ResidualEstimate, ref dosemap.Geometry) []float32 {
	first := onGrid(e.Rise, ref)
	if len(e.Stacks) == 0 {
		return first
	}
	sum := slices.Clone(first)
	cnt := make([]uint8, len(sum))
	for v, x := range sum {
		if x == x {
			cnt[v] = 1
		}
	}
	for _, st := range e.Stacks {
		for v, x := range onGrid(st, ref) {
			if x != x {
				continue
			}
			if cnt[v] == 0 {
				sum[v] = 0
			}
			sum[v] += x
			cnt[v]++
		}
	}
	for v, c := range cnt {
		if c > 1 {
			sum[v] /= float32(c)
		}
	}
	return sum
}

// hiddenHeat reports whether e holds a positive rise on any stack.
func hiddenHeat(e dosemap.ResidualEstimate) bool {
	pos := func(x float32) bool { return x > 0 }
	if e.Rise != nil && slices.ContainsFunc(e.Rise.Data, pos) {
		return true
	}
	for _, st := range e.Stacks {
		if slices.ContainsFunc(st.Data, pos) {
			return true
		}
	}
	return false
}

// withResidual prepares so again with the estimate e added to the
// temperatures of each of its stacks.
func withResidual(ctx context.Context, so *dosemap.Sonication, s Settings, ref dosemap.Geometry, keep *keepBox, e dosemap.ResidualEstimate) (*sonData, error) {
	if len(so.Stacks) == 0 {
		sd, _, err := prepareSonication(ctx, so, s, ref, keep, math.NaN(), e.Rise.Data)
		return sd, err
	}
	offsets := [][]float32{e.Rise.Data}
	for _, st := range e.Stacks {
		offsets = append(offsets, st.Data)
	}
	sd, _, err := prepareStacks(ctx, so, s, ref, keep, math.NaN(), offsets)
	return sd, err
}

// takeCorrected makes sd hold the dose of redo (the same sonication with
// the residual heat added), keeping the as-measured dose beside it.
func (sd *sonData) takeCorrected(redo *sonData, ref dosemap.Geometry) {
	sd.measured, sd.dose, sd.peak = sd.dose, redo.dose, redo.peak
	sd.measuredReach, sd.reach = sd.reach, newReach(ref, sd.dose)
	if redo.series != nil {
		sd.series, sd.source = redo.series, redo.source
	}
	if redo.noise != nil {
		sd.noise = redo.noise
	}
}

// doseOf returns the dose of sd that dc sums (the as-measured one beside
// the residual heat correction) and the reach of that dose.
func (dc *doseCache) doseOf(sd *sonData) ([]float32, reach) {
	if dc.asMeasured && sd.measured != nil {
		return sd.measured, sd.measuredReach
	}
	return sd.dose, sd.reach
}

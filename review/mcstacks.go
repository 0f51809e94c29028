package review

import (
	"context"
	"math"
	"runtime"
	"sync"

	"dosecover/dosemap"
)

// Monte Carlo of sonications measured off the session's thermometry grid.
//
// A sonication measured on several stacks (planes of several
// orientations), or on one stack off the session's thermometry grid (a
// moving slab), enters the trials stack by stack: each stack keeps its own
// temperatures and its own noise (Sigma, estimated from that stack's
// baseline frames by dosemap.Thermometry), a trial perturbs each stack
// with its own noise (dosemap.MonteCarloVoxels, on the stack's grid), and
// the trial doses are combined on the thermometry grid as the noiseless
// dose is: each stack's dose trilinearly resampled (dosemap.Resample,
// same voxels and weights: Geometry.Taps) and averaged where the stacks of
// one sonication overlap. Every stack draws its noise from streams of its
// own (stackSeed), so stacks and sonications are independent, and a
// voxel's numbers do not depend on which other voxels are computed.

// stackNoise is one stack's thermometry kept for the Monte Carlo: its
// temperatures around the target on its own grid (the block of the stack
// holding the analysis region when the case's frames stay in their files;
// the whole series otherwise) and their noise.
type stackNoise struct {
	ts  *dosemap.TemperatureSeries
	ids []int // voxel of the stack's whole grid for each voxel of ts (noise streams); nil: the same
	pos int   // position of the stack in its sonication (0: the first)
}

// newStackNoise keeps ts for the Monte Carlo, cut to the part of its grid
// around keep's block when keep is not nil. It returns nil when ts has no
// noise estimate (temperature maps): such a stack enters without noise.
func newStackNoise(ts *dosemap.TemperatureSeries, keep *keepBox) *stackNoise {
	noisy := false
	for _, x := range ts.Sigma {
		if x > 0 && !math.IsInf(float64(x), 0) {
			noisy = true
			break
		}
	}
	if !noisy {
		return nil
	}
	if keep == nil {
		return &stackNoise{ts: ts}
	}
	b := newKeepBox(ts.Geometry, keep.corners())
	return &stackNoise{ts: b.crop(ts), ids: b.ids}
}

// corners returns the patient positions of the corner voxel centres of
// b's block.
func (b *keepBox) corners() []vec3 {
	g := b.sub
	var out []vec3
	for _, k := range [2]int{0, g.Slices - 1} {
		for _, j := range [2]int{0, g.Rows - 1} {
			for _, i := range [2]int{0, g.Cols - 1} {
				out = append(out, g.Point(float64(i), float64(j), float64(k)))
			}
		}
	}
	return out
}

// stackSeed returns the seed of the noise streams of stack pos of
// sonication number (SplitMix64 finalizer of the three; Steele, Lea &
// Flood 2014): distinct from the seed of the series on the thermometry
// grid and from every other stack's.
func stackSeed(seed uint64, number, pos int) uint64 {
	z := seed ^ 0x9e3779b97f4a7c15*(uint64(uint32(number))<<8|uint64(pos&0xff)+1)
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// stackTaps maps the Monte Carlo region onto the stacks of the included
// sonications that carry stack noise: for each region voxel, per stack
// that measured it, the stack voxels and weights of its resampled dose.
type stackTaps struct {
	stacks []stackRef
	// qOf maps a coarse voxel of the region to its position q.
	qOf map[int]int32
	// Contributions of region position q: cstart[q] .. cstart[q+1]-1, in
	// the order of stacks; each with its taps tstart[c] .. tstart[c+1]-1.
	cstart, cst []int32
	tstart      []int32
	tap         []int32 // voxel of the stack's kept series
	w           []float32
}

// stackRef is one stack of an included sonication.
type stackRef struct {
	son   int // index into Session.sons
	noise *stackNoise
}

// newStackTaps builds the taps of the region voxels (coarse indices) for
// the stacks of the sonications stacked (indexes into s.sons). A stack
// contributes to a voxel when its noiseless dose there is valid, as in the
// noiseless dose of the sonication.
func (s *Session) newStackTaps(region []int, stacked []int, m dosemap.DoseModel) *stackTaps {
	st := &stackTaps{qOf: make(map[int]int32, len(region))}
	for q, n := range region {
		st.qOf[n] = int32(q)
	}
	for _, sn := range stacked {
		for _, nz := range s.sons[sn].noise {
			st.stacks = append(st.stacks, stackRef{sn, nz})
		}
	}
	cg := s.fg.coarse
	type tapList struct {
		c    []int32 // region position of each contribution
		t0   []int32 // start of its taps
		tap  []int32
		w    []float32
		dose []float32
	}
	lists := make([]tapList, len(st.stacks))
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for a := range st.stacks {
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer func() { <-sem; wg.Done() }()
			ts := st.stacks[a].noise.ts
			g := ts.Geometry
			d := m.Dose(ts).Data
			l := &lists[a]
			var idx [8]int
			var w [8]float64
			for q, n := range region {
				ci, cj, ck := cg.IJK(n)
				i, j, k := g.Voxel(cg.Point(float64(ci), float64(cj), float64(ck)))
				nt := g.Taps(i, j, k, &idx, &w)
				if nt == 0 {
					continue
				}
				ok := true
				for b := 0; b < nt; b++ {
					if x := d[idx[b]]; x != x {
						ok = false
						break
					}
				}
				if !ok {
					continue
				}
				l.c = append(l.c, int32(q))
				l.t0 = append(l.t0, int32(len(l.tap)))
				for b := 0; b < nt; b++ {
					l.tap = append(l.tap, int32(idx[b]))
					l.w = append(l.w, float32(w[b]))
				}
			}
		}()
	}
	wg.Wait()
	// Gather by region position, stacks in order.
	cnt := make([]int32, len(region)+1)
	for _, l := range lists {
		for _, q := range l.c {
			cnt[q+1]++
		}
	}
	for q := 1; q < len(cnt); q++ {
		cnt[q] += cnt[q-1]
	}
	st.cstart = cnt
	nc := int(cnt[len(region)])
	st.cst = make([]int32, nc)
	st.tstart = make([]int32, nc+1)
	fill := append([]int32(nil), cnt[:len(region)]...)
	ntap := make([]int32, nc)
	where := make([][]int32, len(lists))
	for a, l := range lists {
		where[a] = make([]int32, len(l.c))
		for e, q := range l.c {
			c := fill[q]
			fill[q]++
			st.cst[c] = int32(a)
			end := int32(len(l.tap))
			if e+1 < len(l.t0) {
				end = l.t0[e+1]
			}
			ntap[c] = end - l.t0[e]
			where[a][e] = c
		}
	}
	for c := 0; c < nc; c++ {
		st.tstart[c+1] = st.tstart[c] + ntap[c]
	}
	st.tap = make([]int32, st.tstart[nc])
	st.w = make([]float32, st.tstart[nc])
	for a, l := range lists {
		for e := range l.c {
			c := where[a][e]
			copy(st.tap[st.tstart[c]:st.tstart[c+1]], l.tap[l.t0[e]:])
			copy(st.w[st.tstart[c]:st.tstart[c+1]], l.w[l.t0[e]:])
		}
	}
	return st
}

// combine returns the stacked sonications' dose at region position q from
// each stack's dose at its voxels (val(a, tap) for stack a): per
// sonication the mean over its stacks of the resampled dose, summed over
// the sonications; NaN when no stack measured the voxel.
func (st *stackTaps) combine(q int, val func(a int, tap int32) float32) float32 {
	total := float32(math.NaN())
	c0, c1 := st.cstart[q], st.cstart[q+1]
	for c := c0; c < c1; {
		son := st.stacks[st.cst[c]].son
		var sum float32
		k := 0
		for ; c < c1 && st.stacks[st.cst[c]].son == son; c++ {
			a := int(st.cst[c])
			var x float32
			for t := st.tstart[c]; t < st.tstart[c+1]; t++ {
				x += st.w[t] * val(a, st.tap[t])
			}
			sum += x
			k++
		}
		if total != total {
			total = 0
		}
		total += sum / float32(k)
	}
	return total
}

// bounds adds to lo and hi (per region position; NaN where nothing was
// added yet) the dose bounds of the stacks (boxDose on each stack at
// ∓mcSkipSigmas·Sigma), combined as the trial doses are: the resampling
// weights are positive, so the combination keeps the bounds' order.
func (st *stackTaps) bounds(m dosemap.DoseModel, lo, hi []float32) {
	los := make([]map[int32]float32, len(st.stacks))
	his := make([]map[int32]float32, len(st.stacks))
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for a := range st.stacks {
		var taps []int
		seen := map[int32]bool{}
		for c, x := range st.cst {
			if int(x) != a {
				continue
			}
			for t := st.tstart[c]; t < st.tstart[c+1]; t++ {
				if !seen[st.tap[t]] {
					seen[st.tap[t]] = true
					taps = append(taps, int(st.tap[t]))
				}
			}
		}
		los[a], his[a] = map[int32]float32{}, map[int32]float32{}
		if len(taps) == 0 {
			continue
		}
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer func() { <-sem; wg.Done() }()
			ts := []*dosemap.TemperatureSeries{st.stacks[a].noise.ts}
			l := boxDose(ts, m, taps, -mcSkipSigmas)
			h := boxDose(ts, m, taps, mcSkipSigmas)
			for b, t := range taps {
				los[a][int32(t)], his[a][int32(t)] = l[b], h[b]
			}
		}()
	}
	wg.Wait()
	for q := range lo {
		if st.cstart[q] == st.cstart[q+1] {
			continue
		}
		lo[q] = nanAdd(lo[q], st.combine(q, func(a int, t int32) float32 { return los[a][t] }))
		hi[q] = nanAdd(hi[q], st.combine(q, func(a int, t int32) float32 { return his[a][t] }))
	}
}

// nanAdd adds y to x, NaN standing for nothing.
func nanAdd(x, y float32) float32 {
	switch {
	case y != y:
		return x
	case x != x:
		return y
	}
	return x + y
}

// trials returns, per trial, the stacked sonications' dose at the coarse
// voxels add (NaN where no stack measured), each stack's trial dose
// computed at the voxels the resampling needs.
func (st *stackTaps) trials(ctx context.Context, s *Session, set Settings, add []int) ([][]float32, error) {
	type need struct {
		col  []int32 // column of each voxel of the stack's series, -1 none
		vals [][]float32
		taps []int
	}
	needs := make([]need, len(st.stacks))
	for _, n := range add {
		q, ok := st.qOf[n]
		if !ok {
			continue
		}
		for c := st.cstart[q]; c < st.cstart[q+1]; c++ {
			a := st.cst[c]
			nd := &needs[a]
			if nd.col == nil {
				nd.col = make([]int32, st.stacks[a].noise.ts.Geometry.Len())
				for v := range nd.col {
					nd.col[v] = -1
				}
			}
			for t := st.tstart[c]; t < st.tstart[c+1]; t++ {
				if v := st.tap[t]; nd.col[v] < 0 {
					nd.col[v] = int32(len(nd.taps))
					nd.taps = append(nd.taps, int(v))
				}
			}
		}
	}
	m := set.doseModel()
	errs := make([]error, len(st.stacks))
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for a := range st.stacks {
		nd := &needs[a]
		if len(nd.taps) == 0 {
			continue
		}
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer func() { <-sem; wg.Done() }()
			if ctx.Err() != nil {
				errs[a] = ctx.Err()
				return
			}
			nz := st.stacks[a].noise
			mask := make([]bool, nz.ts.Geometry.Len())
			for _, v := range nd.taps {
				mask[v] = true
			}
			nd.vals = make([][]float32, set.Trials)
			seed := stackSeed(set.Seed, s.sons[st.stacks[a].son].number, nz.pos)
			errs[a] = dosemap.MonteCarloVoxels([]*dosemap.TemperatureSeries{nz.ts}, m, mask, nz.ids, set.Trials, seed, func(trial int, dose []float32) {
				row := make([]float32, len(nd.taps))
				for b, v := range nd.taps {
					row[b] = dose[v]
				}
				nd.vals[trial] = row
			})
		}()
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	out := make([][]float32, set.Trials)
	nan := float32(math.NaN())
	for trial := range out {
		row := make([]float32, len(add))
		for b, n := range add {
			q, ok := st.qOf[n]
			if !ok {
				row[b] = nan
				continue
			}
			row[b] = st.combine(int(q), func(a int, t int32) float32 {
				nd := &needs[a]
				return nd.vals[trial][nd.col[t]]
			})
		}
		out[trial] = row
	}
	return out, nil
}

// stackNoise makes sd, the first stack of a sonication of several, carry
// the Monte Carlo noise of every stack: its own (its series, when on the
// session's grid, becomes a stack like the others) and more, the further
// stacks' in order.
func (sd *sonData) stackNoise(more []*stackNoise) {
	sd.noise = sd.noiseOf()
	sd.series, sd.source = nil, nil
	sd.noise = append(sd.noise, more...)
	for p, nz := range sd.noise {
		nz.pos = p
	}
}

// mcStencil returns in k and w the coarse voxels and weights with which
// the analysis interpolates the log-dose of fine voxel v (interpLog,
// monitor): the cubic stencil across slices when each of its taps is
// measured (meas), else the linear one (a tap no sonication measured then
// holds the floor dose, as monitor gives a monitored voxel). It returns
// false when v lies outside the thermometry slices.
func (fg *fineGrid) mcStencil(v int, meas []bool, k *[4]int, w *[4]float32) bool {
	fi, fj, f := fg.fine.IJK(v)
	st := &fg.slices[f]
	c := fg.coarseIndex(fi, fj)
	if !st.valid || c < 0 {
		return false
	}
	cs := fg.coarse.SliceLen()
	cubic := true
	for a := 0; a < 4; a++ {
		if st.w[a] != 0 && !meas[st.k[a]*cs+c] {
			cubic = false
		}
	}
	*k, *w = [4]int{}, [4]float32{}
	if cubic {
		for a := 0; a < 4; a++ {
			k[a], w[a] = st.k[a]*cs+c, st.w[a]
		}
		return true
	}
	for a := 0; a < 2; a++ {
		k[a], w[a] = st.lk[a]*cs+c, st.lw[a]
	}
	return true
}

// stencilLog returns Σ w·lv[k] over the taps of weight not 0 (in order;
// -Inf for a voxel without taps, as logAt gives outside the slices).
func stencilLog(lv []float32, k []int32, w []float32) float32 {
	var s float32
	any := false
	for a := 0; a < 4; a++ {
		if w[a] != 0 {
			s += w[a] * lv[k[a]]
			any = true
		}
	}
	if !any {
		return float32(math.Inf(-1))
	}
	return s
}

// noiseOf returns the Monte Carlo noise of one prepared stack: its stack
// noise, or its series when it lies on the session's grid (kept or cropped
// already).
func (sd *sonData) noiseOf() []*stackNoise {
	if ts, ok := sd.series.(*dosemap.TemperatureSeries); ok && ts != nil {
		if nz := newStackNoise(ts, nil); nz != nil {
			return []*stackNoise{nz}
		}
		return nil
	}
	return sd.noise
}

package review

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"dosecover/dosemap"
)

// Sonications measured on their own planes.
//
// Every sonication's dose is held on one reference grid in patient space
// (the "thermometry grid" of the Session, see ThermometryGrid): the grid of
// the first sonication when every stack of every sonication lies on it (the
// single shared slab), else a grid built for the case. A sonication's dose
// exists where it was measured: within half a slice of one of its stacks
// and inside that stack's field of view (dosemap.Resample); elsewhere it
// is NaN, never zero. Where two stacks of one sonication overlap the
// sonication's dose is their mean. See README, "Planes and the
// monitoring rule".

// DefaultNegligibleFraction is the default fraction of the lethal
// threshold below which a sonication's dose counts as negligible for the
// monitoring rule (1 %; a choice of this program, not a value of the
// trade).
const DefaultNegligibleFraction = 0.01

// maxCommonVoxels bounds the common reference grid built for sessions
// measured on different planes (about 4 million voxels, 16 MB per
// sonication's dose).
const maxCommonVoxels = 4_000_000

// stacksOf returns so and its further stacks.
func stacksOf(so *dosemap.Sonication) []*dosemap.Sonication {
	return append([]*dosemap.Sonication{so}, so.Stacks...)
}

// commonGrid returns the reference grid for the sonications sons, whose
// analysis must hold the patient points ext, and whether it differs from
// the first sonication's grid:
//   - every stack on the first sonication's grid: that grid;
//   - every stack parallel to the first with the same spacing and its
//     voxel centres on the first's lattice (a slab that moves along or
//     across the slices): the first's lattice extended over every stack,
//     limited to the box of ext;
//   - otherwise (planes of several orientations, oblique or shifted
//     planes): a grid in the first sonication's orientation covering the
//     box of ext, with the finest in-plane spacing of any stack along all
//     three axes, so that no measured plane loses resolution.
func commonGrid(sons []*dosemap.Sonication, ext []vec3) (dosemap.Geometry, bool) {
	first := sons[0].Geometry
	var all []dosemap.Geometry
	for _, so := range sons {
		for _, st := range stacksOf(so) {
			all = append(all, st.Geometry)
		}
	}
	same := true
	for _, g := range all {
		if !g.SameGrid(first, 0.01) {
			same = false
			break
		}
	}
	if same {
		return first, false
	}
	// Box of ext in the first grid's voxel coordinates.
	elo := [3]float64{math.Inf(1), math.Inf(1), math.Inf(1)}
	ehi := [3]float64{math.Inf(-1), math.Inf(-1), math.Inf(-1)}
	for _, p := range ext {
		i, j, k := first.Voxel(p)
		for a, x := range [3]float64{i, j, k} {
			elo[a], ehi[a] = math.Min(elo[a], x), math.Max(ehi[a], x)
		}
	}
	lattice := true
	lo := [3]int{math.MaxInt, math.MaxInt, math.MaxInt}
	hi := [3]int{math.MinInt, math.MinInt, math.MinInt}
	for _, g := range all {
		if g.Row.Sub(first.Row).Norm() > 1e-4 || g.Col.Sub(first.Col).Norm() > 1e-4 || g.Normal.Sub(first.Normal).Norm() > 1e-4 ||
			g.Spacing.Sub(first.Spacing).Norm() > 1e-3 {
			lattice = false
			break
		}
		i, j, k := first.Voxel(g.Origin)
		o := [3]float64{i, j, k}
		n := [3]int{g.Cols, g.Rows, g.Slices}
		for a := 0; a < 3; a++ {
			r := math.Round(o[a])
			if math.Abs(o[a]-r) > 0.05 {
				lattice = false
			}
			lo[a] = min(lo[a], int(r))
			hi[a] = max(hi[a], int(r)+n[a]-1)
		}
	}
	if lattice {
		for a := 0; a < 3; a++ {
			lo[a] = max(lo[a], int(math.Floor(elo[a]))-1)
			hi[a] = min(hi[a], int(math.Ceil(ehi[a]))+1)
			if hi[a] < lo[a] { // no stack meets the analysis region
				lo[a], hi[a] = int(math.Floor(elo[a])), int(math.Ceil(ehi[a]))
			}
		}
		g := first
		g.Cols, g.Rows, g.Slices = hi[0]-lo[0]+1, hi[1]-lo[1]+1, hi[2]-lo[2]+1
		g.Origin = first.Point(float64(lo[0]), float64(lo[1]), float64(lo[2]))
		return g, true
	}
	h := math.Inf(1)
	for _, g := range all {
		h = math.Min(h, math.Min(g.Spacing[0], g.Spacing[1]))
	}
	// The box of ext along the first grid's axes, in mm.
	axes := [3]vec3{first.Row, first.Col, first.Normal}
	var blo, bhi [3]float64
	for a := 0; a < 3; a++ {
		blo[a], bhi[a] = math.Inf(1), math.Inf(-1)
		for _, p := range ext {
			x := p.Dot(axes[a])
			blo[a], bhi[a] = math.Min(blo[a], x), math.Max(bhi[a], x)
		}
	}
	var n [3]int
	for {
		for a := 0; a < 3; a++ {
			n[a] = int(math.Ceil((bhi[a]-blo[a])/h)) + 1
		}
		if n[0]*n[1]*n[2] <= maxCommonVoxels {
			break
		}
		h *= 1.1
	}
	g := dosemap.Geometry{Cols: n[0], Rows: n[1], Slices: n[2], Spacing: vec3{h, h, h},
		Row: first.Row, Col: first.Col, Normal: first.Normal}
	// Origin: the point whose coordinates along the axes are blo (the
	// axes are orthonormal).
	g.Origin = first.Row.Scale(blo[0]).Add(first.Col.Scale(blo[1])).Add(first.Normal.Scale(blo[2]))
	return g, true
}

// prepareStacks prepares sonication so and its further stacks on ref: the
// dose of the sonication is the mean of its stacks where they overlap.
// clock is the first stack's start on the session clock (each stack keeps
// its cooling tail for the residual heat estimate; see joinTails);
// offsets, when not nil, holds the residual heat correction of each stack
// on its own grid (see stackOffset).
func prepareStacks(ctx context.Context, so *dosemap.Sonication, s Settings, ref dosemap.Geometry, keep *keepBox, clock float64, offsets [][]float32) (*sonData, string, error) {
	sd, unit, err := prepareSonication(ctx, so, s, ref, keep, clock, stackOffset(offsets, 0))
	if err != nil {
		return nil, "", err
	}
	if len(so.Stacks) > 0 && !slices.ContainsFunc(sd.dose, func(x float32) bool { return x == x }) {
		sd.notes = append(sd.notes, fmt.Sprintf("its %s stack (series %s) lies outside the analysis region; that stack's dose is not used", orientationName(so.Geometry), so.SeriesUID))
	}
	var cnt []uint8
	var stackNoises []*stackNoise    // the further stacks' noise (Monte Carlo)
	var tails []*dosemap.CoolingTail // the further stacks' cooling tails
	for n, st := range so.Stacks {
		e, u, err := prepareSonication(ctx, st, s, ref, keep, stackClock(so, st, clock), stackOffset(offsets, n+1))
		if err != nil {
			return nil, "", fmt.Errorf("stack of series %s: %w", st.SeriesUID, err)
		}
		if u != unit {
			return nil, "", fmt.Errorf("stack of series %s: dose in %s, the sonication's first stack in %s", st.SeriesUID, u, unit)
		}
		if cnt == nil {
			sd.dose = append([]float32(nil), sd.dose...) // may alias the first stack's volume
			cnt = make([]uint8, len(sd.dose))
			for v, x := range sd.dose {
				if x == x {
					cnt[v] = 1
				}
			}
		}
		any := false
		for v, x := range e.dose {
			if x != x {
				continue
			}
			any = true
			if cnt[v] == 0 {
				sd.dose[v] = x
			} else {
				sd.dose[v] = (sd.dose[v]*float32(cnt[v]) + x) / float32(cnt[v]+1)
			}
			cnt[v] = min(cnt[v]+1, 250)
		}
		if !any {
			sd.notes = append(sd.notes, fmt.Sprintf("its %s stack (series %s) lies outside the analysis region; that stack's dose is not used", orientationName(st.Geometry), st.SeriesUID))
		}
		sd.notes = append(sd.notes, e.notes...)
		stackNoises = append(stackNoises, e.noiseOf()...)
		tails = append(tails, e.tail)
		if sd.temp == nil || (e.temp != nil && e.temp.peak > sd.temp.peak) {
			sd.temp = e.temp
		}
		if e.peak > sd.peak {
			sd.peak = e.peak
		}
	}
	if len(so.Stacks) > 0 {
		sd.stackNoise(stackNoises)
		sd.tail = joinTails(sd.tail, tails)
	}
	measured := false
	for _, x := range sd.dose {
		if x == x {
			measured = true
			break
		}
	}
	if !measured {
		sd.notes = append(sd.notes, fmt.Sprintf("its thermometry (series %s, %s) lies outside the analysis region: its dose is unknown there", so.SeriesUID, orientationName(so.Geometry)))
	}
	sd.reach = newReach(ref, sd.dose)
	return sd, unit, nil
}

// orientationName names the orientation of g's slices (PlaneOrientation of
// its normal).
func orientationName(g dosemap.Geometry) string { return PlaneOrientation(g.Normal) }

// PlaneOrientation names the orientation of a plane from its unit normal
// n (patient LPS): axial, coronal or sagittal when n lies within about
// 2.6° of a patient axis (|cos| ≥ 0.999; common practice for calling a
// plane by an axis), else oblique.
func PlaneOrientation(n dosemap.Vec3) string {
	ax := 0
	for i := 1; i < 3; i++ {
		if math.Abs(n[i]) > math.Abs(n[ax]) {
			ax = i
		}
	}
	if math.Abs(n[ax]) < 0.999 {
		return "oblique"
	}
	return [...]string{"sagittal", "coronal", "axial"}[ax]
}

// reach locates a sonication's hottest measured point (largest dose) on
// the reference grid.
type reach struct {
	g   dosemap.Geometry
	at  int // voxel index of the largest dose; -1 when nothing measured
	hot vec3
}

func newReach(g dosemap.Geometry, dose []float32) reach {
	r := reach{g: g, at: -1}
	best := float32(math.Inf(-1))
	for v, x := range dose {
		if x == x && x > best {
			best, r.at = x, v
		}
	}
	if r.at >= 0 {
		i, j, k := g.IJK(r.at)
		r.hot = g.Point(float64(i), float64(j), float64(k))
	}
	return r
}

// extent returns the semi-axes (mm, along the grid's row, column and
// normal) of the ellipsoid around the hottest point outside which the
// sonication's dose is taken to stay below eps, which of them were
// measured, and ok false when its peak dose is below eps (it can then be
// ignored everywhere).
//
// The heated region is the connected region (6-connected) of measured
// voxels at or above eps that holds the hottest point. Along an axis on
// which that region stays inside the measured voxels (no voxel of it has
// an unmeasured neighbour or the grid's edge along the axis) the semi-axis
// is the largest distance along the axis from the hottest point to a voxel
// of the region: the heating was seen to end. Along the other axes (the
// normal of a plane, or a slab too thin to hold the heating) it is the
// longest measured semi-axis or, when focalMM > 0 (Settings.FocalLengthMM,
// the heating's length along the beam), half of focalMM; no less than what
// was seen either way. Half a voxel diagonal is added to each. Restricting
// the extent to the connected region keeps isolated noisy voxels far from
// the focus from stretching it.
func (r reach) extent(dose []float32, eps float64, seen []bool, focalMM float64) (semi [3]float64, measured [3]bool, ok bool) {
	if r.at < 0 || !(float64(dose[r.at]) >= eps) {
		return semi, measured, false
	}
	g := r.g
	e := float32(eps)
	i0, j0, k0 := g.IJK(r.at)
	seen[r.at] = true
	queue := []int{r.at}
	region := []int{r.at}
	defer func() { // leave seen clear for the next call
		for _, v := range region {
			seen[v] = false
		}
	}()
	var far [3]int
	open := [3]bool{}
	for len(queue) > 0 {
		v := queue[len(queue)-1]
		queue = queue[:len(queue)-1]
		i, j, k := g.IJK(v)
		far[0], far[1], far[2] = max(far[0], abs(i-i0)), max(far[1], abs(j-j0)), max(far[2], abs(k-k0))
		for n, d := range [6][3]int{{1, 0, 0}, {-1, 0, 0}, {0, 1, 0}, {0, -1, 0}, {0, 0, 1}, {0, 0, -1}} {
			a, b, c := i+d[0], j+d[1], k+d[2]
			if !g.Contains(a, b, c) {
				open[n/2] = true
				continue
			}
			w := g.Index(a, b, c)
			if x := dose[w]; x != x {
				open[n/2] = true
				continue
			}
			if seen[w] || !(dose[w] >= e) {
				continue
			}
			seen[w] = true
			queue = append(queue, w)
			region = append(region, w)
		}
	}
	longest := 0.0
	for a := 0; a < 3; a++ {
		semi[a] = float64(far[a]) * g.Spacing[a]
		measured[a] = !open[a]
		if measured[a] {
			longest = math.Max(longest, semi[a])
		}
	}
	if focalMM > 0 {
		longest = focalMM / 2
	}
	for a := 0; a < 3; a++ {
		if !measured[a] {
			semi[a] = math.Max(semi[a], longest)
		}
		semi[a] += g.Spacing.Norm() / 2
	}
	return semi, measured, true
}

// Monitoring reports the monitoring rule of an analysis: a voxel is
// monitored when every included sonication that could have given it a
// non-negligible dose measured it (README, "Planes and the monitoring
// rule"), beside the strict rule (every included sonication measured it)
// and the measured planes (at least one did).
type Monitoring struct {
	// NegligibleFraction of the threshold and the dose it stands for.
	NegligibleFraction float64 `json:"negligible_fraction"`
	NegligibleDose     float64 `json:"negligible_dose"`
	// StrictFraction is the part of the target every included sonication
	// measured, StrictCovered the covered part of it (null when empty).
	StrictFraction float64  `json:"strict_monitored_fraction"`
	StrictCovered  *float64 `json:"strict_covered_fraction"`
	// MeasuredFraction is the part of the target at least one included
	// sonication measured, MeasuredCovered the part of it with a lethal
	// measured dose (the coverage on the measured planes alone; null when
	// empty).
	MeasuredFraction float64  `json:"measured_planes_fraction"`
	MeasuredCovered  *float64 `json:"measured_planes_covered_fraction"`
	// Reach is, per included sonication, how far from its hottest point
	// its measured dose reaches the negligible dose.
	Reach []SonicationReach `json:"reach"`
	// Monitored is 1 where the analysis voxel is monitored by the rule,
	// else 0 (analysis grid).
	Monitored *dosemap.Volume `json:"-"`
}

// SonicationReach is one sonication's extent for the monitoring rule.
type SonicationReach struct {
	Sonication int        `json:"sonication"`
	HottestMM  [3]float64 `json:"hottest_mm"` // hottest measured point (largest dose), patient mm
	// SemiAxesMM are the semi-axes, along the analysis grid's row, column
	// and normal, of the ellipsoid around the hottest point outside which
	// its dose is negligible; null when its peak dose is negligible (it is
	// then ignored).
	SemiAxesMM *[3]float64 `json:"semi_axes_mm"`
	// Measured says along which of those axes its heating was seen to
	// end inside its planes; along the others the longest measured
	// semi-axis is assumed, or half the focal length when one is set
	// (Settings.FocalLengthMM).
	Measured [3]bool `json:"axes_measured"`
}

// monitor fills the monitoring masks of dc for the negligible dose of set
// (kept while that dose and the included sonications stay the same).
func (s *Session) monitor(set Settings, dc *doseCache) {
	eps := set.NegligibleFraction * set.Threshold
	type ellipsoid struct {
		c    vec3
		semi [3]float64
		ok   bool
	}
	info := &Monitoring{NegligibleFraction: set.NegligibleFraction, NegligibleDose: eps, Reach: []SonicationReach{}}
	var ells []ellipsoid
	var key []byte
	seen := make([]bool, s.fg.coarse.Len())
	for _, n := range dc.included {
		sd := s.sons[n]
		dose, rc := dc.doseOf(sd)
		semi, measured, ok := rc.extent(dose, eps, seen, set.FocalLengthMM)
		sr := SonicationReach{Sonication: sd.number, HottestMM: [3]float64(rc.hot), Measured: measured}
		ells = append(ells, ellipsoid{rc.hot, semi, ok})
		if ok {
			sr.SemiAxesMM = &semi
		}
		info.Reach = append(info.Reach, sr)
		key = fmt.Appendf(key, "%t%.3f/%.3f/%.3f,", ok, semi[0], semi[1], semi[2])
	}
	if dc.monKey == string(key) && dc.monInfo != nil {
		return
	}
	dc.monKey, dc.monInfo = string(key), info
	g := s.fg.coarse
	cl := g.Len()
	// mon: no included sonication that could reach the voxel left it
	// unmeasured.
	mon := make([]bool, cl)
	for v := range mon {
		mon[v] = true
	}
	dims := [3]int{g.Cols, g.Rows, g.Slices}
	for a, n := range dc.included {
		el := ells[a]
		if !el.ok {
			continue
		}
		d, _ := dc.doseOf(s.sons[n])
		// The ellipsoid's box in voxel coordinates (its axes are the
		// grid's).
		i, j, k := g.Voxel(el.c)
		c := [3]float64{i, j, k}
		var lo, hi [3]int
		for ax := 0; ax < 3; ax++ {
			r := el.semi[ax] / g.Spacing[ax]
			lo[ax] = max(0, int(math.Floor(c[ax]-r)))
			hi[ax] = min(dims[ax]-1, int(math.Ceil(c[ax]+r)))
		}
		for kk := lo[2]; kk <= hi[2]; kk++ {
			dk := (float64(kk) - c[2]) * g.Spacing[2] / el.semi[2]
			for jj := lo[1]; jj <= hi[1]; jj++ {
				dj := (float64(jj) - c[1]) * g.Spacing[1] / el.semi[1]
				for ii := lo[0]; ii <= hi[0]; ii++ {
					di := (float64(ii) - c[0]) * g.Spacing[0] / el.semi[0]
					if di*di+dj*dj+dk*dk > 1 {
						continue
					}
					if v := g.Index(ii, jj, kk); d[v] != d[v] {
						mon[v] = false
					}
				}
			}
		}
	}
	// Monitored voxels no sonication measured hold a negligible dose.
	floor := logDose(0)
	lcMon := slices.Clone(dc.lc)
	for v := range mon {
		if mon[v] && dc.cnt[v] == 0 {
			lcMon[v] = floor
		}
	}
	fl := s.fg.fine.Len()
	if dc.monFine == nil {
		dc.monFine = make([]bool, fl)
		dc.logFine = make([]float32, fl)
	}
	s.fg.interpMask(lcMon, mon, dc.monFine)
	copy(dc.logFine, dc.logBase)
	for v, m := range dc.monFine {
		if m && dc.logFine[v] != dc.logFine[v] {
			dc.logFine[v] = s.fg.logLinear(lcMon, v)
		}
	}
}

// logLinear returns the log-dose at fine voxel n interpolated linearly
// across slices from coarse log-dose lv (the taps must be valid).
func (fg *fineGrid) logLinear(lv []float32, n int) float32 {
	fi, fj, f := fg.fine.IJK(n)
	st := &fg.slices[f]
	c := fg.coarseIndex(fi, fj)
	cs := fg.coarse.SliceLen()
	var s float32
	for a := 0; a < 2; a++ {
		if st.lw[a] != 0 {
			s += st.lw[a] * lv[st.lk[a]*cs+c]
		}
	}
	return s
}

// monitoringFigures fills r.Monitoring from dc and the lethal mask.
func (s *Session) monitoringFigures(dc *doseCache, lethal []bool) *Monitoring {
	m := *dc.monInfo
	var tv, sv, sc, mv, mc float64
	for v, o := range s.occ {
		if o == 0 {
			continue
		}
		w := float64(o)
		tv += w
		if dc.strictFine[v] {
			sv += w
			if lethal[v] {
				sc += w
			}
		}
		if dc.measureFine[v] {
			mv += w
			if lethal[v] {
				mc += w
			}
		}
	}
	if tv > 0 {
		m.StrictFraction, m.MeasuredFraction = sv/tv, mv/tv
	}
	g := s.fg.fine
	m.Monitored = &dosemap.Volume{Geometry: g, Data: make([]float32, g.Len())}
	for v, on := range dc.monFine {
		if on {
			m.Monitored.Data[v] = 1
		}
	}
	if sv > 0 {
		m.StrictCovered = opt(sc / sv)
	}
	if mv > 0 {
		m.MeasuredCovered = opt(mc / mv)
	}
	return &m
}

// interpMask fills mon (analysis grid) as interpLog does, without the
// interpolated values: a fine voxel is set when every coarse voxel of its
// linear stencil is set in full and its log-dose lc is valid.
func (fg *fineGrid) interpMask(lc []float32, full []bool, mon []bool) {
	cs := fg.coarse.SliceLen()
	n := 0
	for f := 0; f < fg.fine.Slices; f++ {
		st := &fg.slices[f]
		for fj := 0; fj < fg.fine.Rows; fj++ {
			for fi := 0; fi < fg.fine.Cols; fi++ {
				m := false
				if c := fg.coarseIndex(fi, fj); st.valid && c >= 0 {
					m = true
					for a := 0; a < 2; a++ {
						if st.lw[a] != 0 {
							if v := st.lk[a]*cs + c; !full[v] || lc[v] != lc[v] {
								m = false
							}
						}
					}
				}
				mon[n] = m
				n++
			}
		}
	}
}

// unseenHeatingWarning names the included sonications whose measured dose
// stays below the negligible dose everywhere (SonicationReach without
// semi-axes): the monitoring rule ignores them, which is right for a
// sonication that did not heat, and wrong when its planes missed where it
// heated. The reader is told so; "" when there is none.
func unseenHeatingWarning(m *Monitoring, set Settings) string {
	if m == nil {
		return ""
	}
	var nums []string
	for _, sr := range m.Reach {
		if sr.SemiAxesMM == nil {
			nums = append(nums, strconv.Itoa(sr.Sonication))
		}
	}
	if len(nums) == 0 {
		return ""
	}
	word := "sonication"
	if len(nums) > 1 {
		word = "sonications"
	}
	return fmt.Sprintf("%s %s: no dose above %g %% of the threshold anywhere on the measured planes; if heating was delivered, the planes missed it and its dose is not counted (check where the planes lay)",
		word, strings.Join(nums, ", "), 100*set.NegligibleFraction)
}

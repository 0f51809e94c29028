//go:build cgo

package main

import (
	"context"
	"fmt"
	"math"
	"sync"

	"dosecover/dosemap"
	"dosecover/review"
)

// The analysis: package review.
func init() {
	prepareCase = prepareReview
	defaultSettings = func() analysisSettings {
		d := review.DefaultSettings()
		s := builtinSettings()
		s.Threshold, s.MarginMM, s.Model, s.Trials = d.Threshold, d.MarginMM, d.Model, d.Trials
		s.CEM43Break, s.CEM43RAbove, s.CEM43RBelow = d.CEM43.Break, d.CEM43.RAbove, d.CEM43.RBelow
		s.ArrheniusSet, s.ArrheniusA, s.ArrheniusEa = d.Arrhenius.Tissue, d.Arrhenius.A, d.Arrhenius.Ea
		t := d.Thermometry
		s.PRFAlpha, s.BodyTemp, s.BaselineFrames, s.DriftOrder = t.PRF.Alpha, t.BodyTemp, t.BaselineFrames, max(t.DriftOrder, 1)
		s.Drift = map[dosemap.DriftMethod]string{dosemap.DriftNone: "none", dosemap.DriftMean: "mean", dosemap.DriftPolynomial: "polynomial"}[t.Drift]
		if s.Drift == "" {
			s.Drift = "mean"
		}
		return s
	}
	for _, a := range dosemap.ArrheniusSets {
		arrheniusSets = append(arrheniusSets, arrheniusSet{Name: a.Tissue, A: a.A, Ea: a.Ea})
	}
}

// reviewSettings maps the window's settings onto the analysis settings of
// case c (the drawn drift reference becomes a mask on its thermometry grid).
func reviewSettings(s analysisSettings, c *dosemap.Case) (review.Settings, error) {
	r := review.DefaultSettings()
	r.Threshold, r.MarginMM, r.Model = s.Threshold, s.MarginMM, s.Model
	r.Excluded = append([]int(nil), s.Excluded...)
	if s.Trials >= 0 {
		r.Trials = s.Trials
	}
	if c, ok := doseModel(analysisSettings{Model: "cem43", CEM43Break: s.CEM43Break, CEM43RAbove: s.CEM43RAbove, CEM43RBelow: s.CEM43RBelow}).(dosemap.CEM43); ok {
		r.CEM43 = c
	}
	if a, ok := doseModel(analysisSettings{Model: "arrhenius", ArrheniusSet: s.ArrheniusSet, ArrheniusA: s.ArrheniusA, ArrheniusEa: s.ArrheniusEa}).(dosemap.Arrhenius); ok {
		r.Arrhenius = a
	}
	r.Thermometry = thermometryOptions(s)
	if s.DriftRef != nil {
		ref, err := referenceMask(s.DriftRef, c)
		if err != nil {
			return r, err
		}
		r.Thermometry.Reference = ref
	}
	return r, nil
}

// referenceMask turns a drawn drift reference into the mask the thermometry
// takes; every sonication must share one grid.
func referenceMask(rr *refRect, c *dosemap.Case) ([]bool, error) {
	if c == nil || len(c.Sonications) == 0 {
		return nil, fmt.Errorf("no thermometry to place the drift reference on")
	}
	g := c.Sonications[0].Geometry
	for _, so := range c.Sonications[1:] {
		if !so.Geometry.SameGrid(g, 0.01) {
			return nil, fmt.Errorf("the sonications were acquired on different grids; a drawn drift reference needs one grid (use the automatic reference)")
		}
	}
	m, n := rr.mask(g)
	if n == 0 {
		return nil, fmt.Errorf("the drawn drift reference (%.0f × %.0f mm) holds no thermometry voxel; draw it inside the thermometry field of view", rr.W, rr.H)
	}
	return m, nil
}

// reviewSession wraps a prepared review.Session. The temperature series
// for the probe are those the session keeps; only a sonication whose
// series the session does not keep (another grid), or thermometry options
// other than the prepared ones, are computed here, once, and kept.
type reviewSession struct {
	c           *dosemap.Case
	rs          *review.Session
	preparedKey string // seriesKey of the settings rs was prepared with

	mu        sync.Mutex
	seriesKey string
	series    []*dosemap.TemperatureSeries // per sonication; nil for dose maps
	seriesErr error
}

func prepareReview(ctx context.Context, lc *loadedCase, s analysisSettings, progress func(stage string, frac float64)) (session, error) {
	set, err := reviewSettings(s, lc.Case)
	if err != nil {
		return nil, err
	}
	rs, err := review.Prepare(ctx, lc.Case, set, progress)
	if err != nil {
		return nil, err
	}
	return &reviewSession{c: lc.Case, rs: rs, preparedKey: seriesKey(s)}, nil
}

// seriesKey names the thermometry options of s the temperature series
// depend on.
func seriesKey(s analysisSettings) string {
	return fmt.Sprintf("%+v %+v", thermometryOptions(s), s.DriftRef)
}

func ptr(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

func (ss *reviewSession) Analyze(ctx context.Context, s analysisSettings) (*analysisResult, error) {
	set, err := reviewSettings(s, ss.c)
	if err != nil {
		return nil, err
	}
	r, err := ss.rs.Analyze(ctx, set, nil)
	if err != nil {
		return nil, err
	}
	out := &analysisResult{
		Threshold: r.Threshold, Unit: doseUnitName(r.DoseUnit), Model: r.Model, MarginMM: r.MarginMM,
		TargetName: r.Target, TargetML: r.TargetVolumeML,
		Covered: r.CoveredFraction, CoveredWhole: r.CoveredFractionOfTarget,
		CoveredP05: ptr(r.CoveredFractionP05), CoveredP95: ptr(r.CoveredFractionP95), Trials: r.Trials,
		NotMonitored: r.NotMonitoredFraction,
		D98:          ptr(r.D98), D50: ptr(r.D50), D2: ptr(r.D2),
		LethalOutside: r.OutsideMarginLethalML,
		Dose:          r.Dose, Target: r.TargetMask, Margin: r.MarginMask,
		Holes3D: r.HoleLabels, Outside3D: r.SpillLabels,
		TargetStructure: ss.c.Target(),
		QualityNotes:    append([]string(nil), r.Warnings...),
		Raw:             r,
	}
	for n := range ss.c.Structures {
		if st := &ss.c.Structures[n]; st.Role == dosemap.RoleAvoid {
			out.AvoidStructures = append(out.AvoidStructures, st)
		}
	}
	out.NotMonitored3D = notMonitoredMask(r.TargetMask, r.Lethal)
	for n, h := range r.Holes {
		d := fmt.Sprintf("depth %.1f mm, slices %s", h.DepthMM, sliceList(h.Slices))
		if h.Certainty != "" {
			d += ", " + h.Certainty
		}
		if h.TouchesUnmonitored {
			d += ", borders unmonitored"
		}
		out.Holes = append(out.Holes, region{Label: fmt.Sprintf("H%d", n+1), VolumeML: h.VolumeMM3 / 1000,
			Centre: dosemap.Vec3(h.CentroidMM), MaxDose: h.MaxDose, Detail: d})
	}
	for n, c := range r.OutsideClusters {
		d := fmt.Sprintf("up to %.1f mm beyond the target, peak %s", c.MaxDistanceMM, fmtDose(c.PeakDose))
		if c.Sonication > 0 {
			d += fmt.Sprintf(", mostly sonication %d (%.0f %%)", c.Sonication, 100*c.SonicationShare)
		}
		out.Outside = append(out.Outside, region{Label: fmt.Sprintf("C%d", n+1), VolumeML: c.VolumeMM3 / 1000,
			Centre: dosemap.Vec3(c.CentroidMM), MaxDose: c.PeakDose, Detail: d})
	}
	for _, a := range r.Avoid {
		out.Avoid = append(out.Avoid, avoidDose{Name: a.Name, VolumeML: a.VolumeML, LethalML: a.LethalVolumeMM3 / 1000, MaxDose: ptr(a.PeakDose)})
	}
	for n := range r.DVH.Dose {
		if n < len(r.DVH.Target) {
			out.DVH = append(out.DVH, xy{r.DVH.Dose[n], r.DVH.Target[n]})
		}
	}
	for _, p := range r.CoverageVsThreshold {
		out.CoverageVsThr = append(out.CoverageVsThr, xy{p.Threshold, p.CoveredFraction})
	}
	quality := map[int]review.SonicationQuality{}
	for _, q := range r.Quality {
		quality[q.Sonication] = q
	}
	var first *dosemap.Sonication
	if len(ss.c.Sonications) > 0 {
		first = ss.c.Sonications[0]
	}
	for _, st := range r.Sonications {
		row := sonicationRow{Number: st.Number, Label: st.Label, PeakTemp: ptr(st.PeakTempC), PeakDose: st.PeakDose,
			DoseAddedML: st.LethalAddedML, CoverageAdded: st.AddedCoverage, Offset: math.NaN(),
			CoolingS: ptr(st.CoolingS), ResidualC: ptr(st.ResidualRiseC)}
		row.ResidualHigh = row.ResidualC > r.Settings.ResidualWarnC
		if so := ss.sonication(st.Number); so != nil {
			row.Start = so.Start
			if first != nil && !so.Start.IsZero() && !first.Start.IsZero() {
				row.Offset = so.Start.Sub(first.Start).Seconds()
			}
			if len(so.Times) > 0 {
				row.Duration = so.Times[len(so.Times)-1] - so.Times[0]
			}
		}
		if q, ok := quality[st.Number]; ok {
			vf := 0
			if so := ss.sonication(st.Number); so != nil {
				vf = so.Geometry.Len() * so.Frames()
			}
			row.Flags, row.Flagged = qualityFlags(q, vf)
		}
		out.Sonications = append(out.Sonications, row)
		out.SonicationDose = append(out.SonicationDose, ss.rs.SonicationDose(st.Number))
	}
	return out, nil
}

func (ss *reviewSession) sonication(num int) *dosemap.Sonication {
	for _, so := range ss.c.Sonications {
		if so.Number == num {
			return so
		}
	}
	return nil
}

// qualityFlags states what the thermometry flagged (rejected frames,
// suspected phase wraps) and, as plain notes, the drift removed, the motion
// measure and the share of invalid voxel-frames. It reports whether any
// flag (not only notes) was raised.
func qualityFlags(q review.SonicationQuality, voxelFrames int) ([]string, bool) {
	var f []string
	if n := len(q.FlaggedFrames); n > 0 {
		f = append(f, fmt.Sprintf("%d frame(s) rejected: %s", n, sliceList(q.FlaggedFrames)))
	}
	if q.Wraps > 0 {
		f = append(f, fmt.Sprintf("%d suspected phase wraps", q.Wraps))
	}
	flagged := len(f) > 0
	if q.MaxDriftC != 0 && !math.IsNaN(q.MaxDriftC) {
		f = append(f, fmt.Sprintf("drift ≤ %.2f °C", math.Abs(q.MaxDriftC)))
	}
	if q.MaxMotion > 0 {
		f = append(f, fmt.Sprintf("motion 1−r ≤ %.2g", q.MaxMotion))
	}
	if q.Invalid > 0 && voxelFrames > 0 {
		f = append(f, fmt.Sprintf("invalid %.1f %% of voxel-frames", 100*float64(q.Invalid)/float64(voxelFrames)))
	}
	return f, flagged
}

// sliceList prints 1-based slice or frame numbers compactly: "3–7, 9".
func sliceList(s []int) string {
	if len(s) == 0 {
		return "—"
	}
	out := ""
	for i := 0; i < len(s); {
		j := i
		for j+1 < len(s) && s[j+1] == s[j]+1 {
			j++
		}
		if out != "" {
			out += ", "
		}
		if j > i {
			out += fmt.Sprintf("%d–%d", s[i], s[j])
		} else {
			out += fmt.Sprint(s[i])
		}
		i = j + 1
	}
	return out
}

// doseUnitName is the unit as shown.
func doseUnitName(u string) string {
	switch u {
	case "CEM43":
		return "CEM43 min"
	case "Omega":
		return "Ω"
	}
	return u
}

// notMonitoredMask marks analysis voxels inside the target whose dose was
// not measured (Lethal is NaN there).
func notMonitoredMask(target, lethal *dosemap.Volume) *dosemap.Volume {
	if target == nil || lethal == nil || len(target.Data) != len(lethal.Data) {
		return nil
	}
	m := dosemap.NewVolume(target.Geometry)
	any := false
	for n, t := range target.Data {
		if t >= 0.5 && lethal.Data[n] != lethal.Data[n] {
			m.Data[n] = 1
			any = true
		}
	}
	if !any {
		return nil
	}
	return m
}

// doseModel returns the dose model of s.
func doseModel(s analysisSettings) dosemap.DoseModel {
	if s.Model == "arrhenius" {
		a := dosemap.DefaultArrhenius()
		if s.ArrheniusA > 0 && s.ArrheniusEa > 0 {
			a.A, a.Ea = s.ArrheniusA, s.ArrheniusEa
			if s.ArrheniusSet != "" {
				a.Tissue = s.ArrheniusSet
			}
		}
		return a
	}
	c := dosemap.DefaultCEM43()
	if s.CEM43RAbove > 0 && s.CEM43RBelow > 0 {
		c.Break, c.RAbove, c.RBelow = s.CEM43Break, s.CEM43RAbove, s.CEM43RBelow
	}
	return c
}

// thermometryOptions returns the engine options of s.
func thermometryOptions(s analysisSettings) dosemap.ThermometryOptions {
	o := dosemap.DefaultThermometryOptions()
	if s.PRFAlpha != 0 {
		o.PRF.Alpha = s.PRFAlpha
	}
	o.PRF.B0 = s.B0
	o.PRF.TE = s.TEms / 1000
	if s.BodyTemp > 0 {
		o.BodyTemp = s.BodyTemp
	}
	if s.BaselineFrames > 0 {
		o.BaselineFrames = s.BaselineFrames
	}
	switch s.Drift {
	case "none":
		o.Drift = dosemap.DriftNone
	case "polynomial":
		o.Drift, o.DriftOrder = dosemap.DriftPolynomial, s.DriftOrder
	default:
		o.Drift = dosemap.DriftMean
	}
	return o
}

// temperatures returns the temperature series of every sonication (nil for
// dose-map sonications), computing them on first use.
func (ss *reviewSession) temperatures(s analysisSettings) ([]*dosemap.TemperatureSeries, error) {
	o := thermometryOptions(s)
	key := seriesKey(s)
	if s.DriftRef != nil {
		ref, err := referenceMask(s.DriftRef, ss.c)
		if err != nil {
			return nil, err
		}
		o.Reference = ref
	}
	ss.mu.Lock()
	defer ss.mu.Unlock()
	if ss.seriesKey == key {
		return ss.series, ss.seriesErr
	}
	ss.series, ss.seriesErr, ss.seriesKey = nil, nil, key
	for _, so := range ss.c.Sonications {
		if so.Dose != nil && !so.HasPhase() && so.Temperature == nil {
			ss.series = append(ss.series, nil)
			continue
		}
		if key == ss.preparedKey {
			if ts := ss.rs.Temperature(so.Number); ts != nil {
				ss.series = append(ss.series, ts)
				continue
			}
		}
		ts, err := dosemap.Thermometry(so, o)
		if err != nil {
			ss.seriesErr = fmt.Errorf("sonication %d: %w", so.Number, err)
			return nil, ss.seriesErr
		}
		ss.series = append(ss.series, ts)
	}
	return ss.series, nil
}

// Probe samples the temperature history at p: the nearest thermometry voxel,
// its in-plane 3×3 mean (valid voxels only; common practice) and the dose
// accumulated by the included sonications, with the moment it reached
// the threshold.
func (ss *reviewSession) Probe(p dosemap.Vec3, s analysisSettings) (*probeCurve, error) {
	series, err := ss.temperatures(s)
	if err != nil {
		return nil, err
	}
	model := doseModel(s)
	ex := s.excludedSet()
	c := &probeCurve{Unit: doseUnitName(model.Unit()), Threshold: s.Threshold, LethalAt: math.NaN()}
	var first *dosemap.Sonication
	var cum float64
	clock := 0.0 // running time when the files give no start times
	voxelText := ""
	for n, so := range ss.c.Sonications {
		if first == nil {
			first = so
		}
		start := clock
		if !so.Start.IsZero() && !first.Start.IsZero() {
			start = so.Start.Sub(first.Start).Seconds()
		}
		c.Boundaries = append(c.Boundaries, start)
		ts := series[n]
		if ts == nil {
			// A ready dose map: no temperatures, its dose counts at the end.
			if !ex[so.Number] {
				d := dosemap.Volume{Geometry: so.Geometry, Data: so.Dose}
				if v := d.Sample(p); v == v {
					cum += float64(v)
				}
			}
			continue
		}
		g := ts.Geometry
		fi, fj, fk := g.Voxel(p)
		i, j, k := int(math.Round(fi)), int(math.Round(fj)), int(math.Round(fk))
		if !g.Contains(i, j, k) {
			clock = start + lastTime(ts) + 30
			continue
		}
		voxelText = fmt.Sprintf("voxel (%d, %d, %d)", i, j, k)
		c.Voxel = g.Point(float64(i), float64(j), float64(k))
		one := &dosemap.TemperatureSeries{Geometry: dosemap.NewAxialGeometry(1, 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})}
		idx := g.Index(i, j, k)
		hidden := math.NaN() // estimated residual heat at this sonication's baseline
		if r := ss.rs.Residual(so.Number); r != nil {
			hidden = float64(r.Sample(c.Voxel))
		}
		for f, fr := range ts.Frames {
			t := start + ts.Times[f] - ts.Times[0]
			T := float64(fr[idx])
			c.Times = append(c.Times, t)
			c.Temp = append(c.Temp, T)
			c.True = append(c.True, T+hidden)
			c.Mean = append(c.Mean, mean3x3(g, fr, i, j, k))
			if ex[so.Number] {
				c.Dose = append(c.Dose, cum)
				continue
			}
			one.Times = append(one.Times, ts.Times[f])
			one.Frames = append(one.Frames, []float32{fr[idx]})
			d := cum
			if len(one.Frames) > 1 {
				if v := model.Dose(one).Data[0]; v == v {
					d += float64(v)
				}
			}
			c.Dose = append(c.Dose, d)
			if math.IsNaN(c.LethalAt) && d >= s.Threshold {
				c.LethalAt = t
			}
		}
		if !ex[so.Number] && len(one.Frames) > 1 {
			if v := model.Dose(one).Data[0]; v == v {
				cum += float64(v)
			}
		}
		clock = start + lastTime(ts) + 30
	}
	if len(c.Times) == 0 {
		return nil, fmt.Errorf("the point (%.1f, %.1f, %.1f) mm lies outside the thermometry of every sonication", p[0], p[1], p[2])
	}
	c.FinalDose = cum
	c.Description = fmt.Sprintf("%s at (%.1f, %.1f, %.1f) mm", voxelText, c.Voxel[0], c.Voxel[1], c.Voxel[2])
	return c, nil
}

func lastTime(ts *dosemap.TemperatureSeries) float64 {
	if len(ts.Times) == 0 {
		return 0
	}
	return ts.Times[len(ts.Times)-1] - ts.Times[0]
}

// mean3x3 is the mean of the valid voxels of the in-plane 3×3 block around
// (i, j) on slice k; NaN when none is valid.
func mean3x3(g dosemap.Geometry, fr []float32, i, j, k int) float64 {
	var s float64
	n := 0
	for dj := -1; dj <= 1; dj++ {
		for di := -1; di <= 1; di++ {
			if g.Contains(i+di, j+dj, k) {
				if v := fr[g.Index(i+di, j+dj, k)]; v == v {
					s += float64(v)
					n++
				}
			}
		}
	}
	if n == 0 {
		return math.NaN()
	}
	return s / float64(n)
}

// PeakTemperature implements session.
func (ss *reviewSession) PeakTemperature(s analysisSettings) (*dosemap.Volume, error) {
	series, err := ss.temperatures(s)
	if err != nil {
		return nil, err
	}
	ex := s.excludedSet()
	var peak *dosemap.Volume
	for n, ts := range series {
		if ts == nil || ex[ss.c.Sonications[n].Number] {
			continue
		}
		v := &dosemap.Volume{Geometry: ts.Geometry, Data: make([]float32, ts.Geometry.Len())}
		for i := range v.Data {
			v.Data[i] = float32(math.NaN())
		}
		for _, fr := range ts.Frames {
			for i, x := range fr {
				if x == x && !(v.Data[i] >= x) {
					v.Data[i] = x
				}
			}
		}
		if peak == nil {
			peak = v
			continue
		}
		if !v.Geometry.SameGrid(peak.Geometry, 0.01) {
			v = dosemap.Resample(v, peak.Geometry)
		}
		for i, x := range v.Data {
			if x == x && !(peak.Data[i] >= x) {
				peak.Data[i] = x
			}
		}
	}
	return peak, nil
}

package review

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sync"

	"dosecover/dosemap"
)

// Probe is the temperature history of one point over the whole session.
type Probe struct {
	Times       []float64    // seconds from the first sonication's start
	Temp        []float64    // °C at the voxel (NaN where invalid)
	Mean        []float64    // °C, mean of the valid voxels of the in-plane 3×3 block around it
	True        []float64    // °C, Temp plus the estimated heat left from earlier sonications at the sonication's baseline (Residual; NaN unknown)
	Dose        []float64    // cumulative dose at the voxel, model unit
	Boundaries  []float64    // start time of each sonication, s
	Numbers     []int        // number of the sonication starting at each boundary
	LethalAt    float64      // time the cumulative dose reached the threshold; NaN never
	FinalDose   float64      // cumulative dose after the last sonication
	Unit        string       // dose unit as shown (Settings.Unit)
	Threshold   float64      // lethal threshold, model unit
	Description string       // the voxel and where it lies
	Voxel       dosemap.Vec3 // centre of the thermometry voxel sampled, mm
}

// seriesCache holds the temperature series of every sonication of a
// Session for the probe and the peak temperature, computed on first use.
type seriesCache struct {
	once   sync.Once
	series []*dosemap.TemperatureSeries // per sonication; nil for ready dose maps
	err    error
}

// temperatures returns the temperature series of every sonication (nil
// for a ready dose map) with the thermometry the session was prepared
// with: those the session keeps, the others computed once. A session
// whose frames stay in their files keeps only the block around the
// target (keepBox); the series are then those blocks, and Probe computes
// the series of a point outside them from the files when asked
// (probeSeries), so the frames are never all held at once.
func (s *Session) temperatures() ([]*dosemap.TemperatureSeries, error) {
	c := &s.probe
	c.once.Do(func() {
		for _, sd := range s.sons {
			so := sd.source
			if so == nil || (so.Dose != nil && !so.HasPhase() && so.Temperature == nil) {
				c.series = append(c.series, nil)
				continue
			}
			if ts, ok := sd.series.(*dosemap.TemperatureSeries); ok && s.keep != nil {
				c.series = append(c.series, ts)
				continue
			}
			if ts := s.Temperature(sd.number); ts != nil {
				c.series = append(c.series, ts)
				continue
			}
			ts, err := thermometry(so, s.prepared.Thermometry)
			if err != nil {
				c.series, c.err = nil, fmt.Errorf("sonication %d: %w", sd.number, err)
				return
			}
			c.series = append(c.series, ts)
		}
	})
	return c.series, c.err
}

// checkProbeSettings refuses settings whose thermometry or dose model
// differs from the prepared ones.
func (s *Session) checkProbeSettings(set Settings) (Settings, error) {
	set = set.complete()
	if err := set.Validate(); err != nil {
		return set, err
	}
	if set.NeedsThermometry(s.prepared) {
		return set, errors.New("dose model parameters or thermometry options differ from those this session was prepared with; prepare it again")
	}
	return set, nil
}

// Probe samples the temperature history at patient position p: the
// nearest thermometry voxel of each sonication, its in-plane 3×3 mean
// (valid voxels only; common practice) and the dose accumulated by the
// sonications set includes, with the moment it reached set.Threshold.
// Sonications follow one another on their start times; without them,
// each starts 30 s after the end of the one before.
func (s *Session) Probe(p dosemap.Vec3, set Settings) (*Probe, error) {
	set, err := s.checkProbeSettings(set)
	if err != nil {
		return nil, err
	}
	series, err := s.temperatures()
	if err != nil {
		return nil, err
	}
	model := set.doseModel()
	ex := map[int]bool{}
	for _, n := range set.Excluded {
		ex[n] = true
	}
	c := &Probe{Unit: set.Unit(), Threshold: set.Threshold, LethalAt: math.NaN()}
	var first *dosemap.Sonication
	var cum float64
	clock := 0.0 // running time when the files give no start times
	voxelText := ""
	for n, sd := range s.sons {
		so := sd.source
		if so == nil {
			// A sonication the session keeps no source of (a ready dose
			// map): its dose, on the thermometry grid, counts at its start.
			c.Boundaries = append(c.Boundaries, clock)
			c.Numbers = append(c.Numbers, sd.number)
			if !ex[sd.number] {
				d := dosemap.Volume{Geometry: s.fg.coarse, Data: sd.dose}
				if v := d.Sample(p); v == v {
					cum += float64(v)
				}
			}
			continue
		}
		if first == nil {
			first = so
		}
		start := clock
		if !so.Start.IsZero() && !first.Start.IsZero() {
			start = so.Start.Sub(first.Start).Seconds()
		}
		c.Boundaries = append(c.Boundaries, start)
		c.Numbers = append(c.Numbers, so.Number)
		ts := series[n]
		if ts != nil && s.keep != nil && !insideBlock(ts.Geometry, p) {
			full, err := thermometry(so, s.prepared.Thermometry)
			if err != nil {
				return nil, fmt.Errorf("sonication %d: %w", so.Number, err)
			}
			ts = full
		}
		if ts == nil {
			// A ready dose map: no temperatures, its dose counts at the end.
			if !ex[so.Number] && so.Dose != nil {
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
			clock = start + seriesLength(ts) + 30
			continue
		}
		// Named on the sonication's own grid (ts may be its kept block).
		vi, vj, vk := so.Geometry.Voxel(p)
		voxelText = fmt.Sprintf("voxel (%.0f, %.0f, %.0f)", math.Round(vi), math.Round(vj), math.Round(vk))
		c.Voxel = g.Point(float64(i), float64(j), float64(k))
		one := &dosemap.TemperatureSeries{Geometry: dosemap.NewAxialGeometry(1, 1, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{})}
		idx := g.Index(i, j, k)
		hidden := math.NaN() // estimated residual heat at this sonication's baseline
		if sd.residual != nil && !s.prepared.CarryOver {
			hidden = float64((&dosemap.Volume{Geometry: s.fg.coarse, Data: sd.residual}).Sample(c.Voxel))
		} else if s.prepared.CarryOver {
			hidden = 0 // the temperatures hold it already
		}
		for f, fr := range ts.Frames {
			t := start + ts.Times[f] - ts.Times[0]
			c.Times = append(c.Times, t)
			c.Temp = append(c.Temp, float64(fr[idx]))
			c.True = append(c.True, float64(fr[idx])+hidden)
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
			if math.IsNaN(c.LethalAt) && d >= set.Threshold {
				c.LethalAt = t
			}
		}
		if !ex[so.Number] && len(one.Frames) > 1 {
			if v := model.Dose(one).Data[0]; v == v {
				cum += float64(v)
			}
		}
		clock = start + seriesLength(ts) + 30
	}
	if len(c.Times) == 0 {
		return nil, fmt.Errorf("the point (%.1f, %.1f, %.1f) mm lies outside the thermometry of every sonication", p[0], p[1], p[2])
	}
	c.FinalDose = cum
	c.Description = fmt.Sprintf("%s at (%.1f, %.1f, %.1f) mm", voxelText, c.Voxel[0], c.Voxel[1], c.Voxel[2])
	return c, nil
}

// insideBlock reports whether the voxel of g nearest p and its in-plane
// 3×3 block lie inside g (a kept block answers for the probe there).
func insideBlock(g dosemap.Geometry, p dosemap.Vec3) bool {
	fi, fj, fk := g.Voxel(p)
	i, j, k := int(math.Round(fi)), int(math.Round(fj)), int(math.Round(fk))
	return g.Contains(i-1, j-1, k) && g.Contains(i+1, j+1, k)
}

// seriesLength returns the time from the first to the last frame, s.
func seriesLength(ts *dosemap.TemperatureSeries) float64 {
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

// PeakTemperature returns the highest temperature of every voxel over the
// sonications set includes (°C, NaN where never valid), on the grid of the
// first of them with temperatures (the others resampled onto it); nil when
// none has temperatures.
func (s *Session) PeakTemperature(set Settings) (*dosemap.Volume, error) {
	set, err := s.checkProbeSettings(set)
	if err != nil {
		return nil, err
	}
	ex := map[int]bool{}
	for _, n := range set.Excluded {
		ex[n] = true
	}
	var peak *dosemap.Volume
	for _, sd := range s.sons {
		if sd.peakTemp == nil || ex[sd.number] {
			continue
		}
		v := &dosemap.Volume{Geometry: sd.peakTemp.Geometry, Data: slices.Clone(sd.peakTemp.Data)}
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

// NotMonitored returns the analysis voxels inside the target whose dose
// was not measured (Lethal is NaN there) as a mask (1 inside), or nil when
// there is none or the result holds no grids.
func (r *Result) NotMonitored() *dosemap.Volume {
	target, lethal := r.TargetMask, r.Lethal
	if target == nil || lethal == nil || len(target.Data) != len(lethal.Data) {
		return nil
	}
	m := dosemap.NewVolume(target.Geometry)
	found := false
	for n, t := range target.Data {
		if t >= 0.5 && lethal.Data[n] != lethal.Data[n] {
			m.Data[n] = 1
			found = true
		}
	}
	if !found {
		return nil
	}
	return m
}

package review

import (
	"context"
	"errors"
	"fmt"
	"math"

	"dosecover/dosemap"
)

// prepareSonication computes the dose of one sonication on the reference
// thermometry grid ref and its temperature figures. It returns the dose
// unit.
func prepareSonication(ctx context.Context, so *dosemap.Sonication, s Settings, ref dosemap.Geometry) (*sonData, string, error) {
	if err := so.Geometry.Validate(); err != nil {
		return nil, "", fmt.Errorf("thermometry grid: %w", err)
	}
	sd := &sonData{number: so.Number, label: so.Label}
	switch {
	case so.Dose != nil:
		if s.Model != "cem43" {
			return nil, "", fmt.Errorf("the case holds a ready dose map (CEM43) for this sonication; the %s model needs its thermometry", s.Model)
		}
		if len(so.Dose) != so.Geometry.Len() {
			return nil, "", fmt.Errorf("dose map holds %d values for a %s", len(so.Dose), so.Geometry)
		}
		sd.dose = onGrid(&dosemap.Volume{Geometry: so.Geometry, Data: so.Dose}, ref)
	default:
		return nil, "", errors.New("computing dose from thermometry frames is not available in this build")
	}
	sd.peak = math.Inf(-1)
	for _, x := range sd.dose {
		if x == x && float64(x) > sd.peak {
			sd.peak = float64(x)
		}
	}
	return sd, "CEM43", nil
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
	for f, fr := range frames {
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
		_ = f
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

// mcCache keeps Monte Carlo trial doses between analyses.
type mcCache struct{}

// uncertainty fills the Monte Carlo figures of r.
func (s *Session) uncertainty(ctx context.Context, r *Result, set Settings, dc *doseCache, hl []int32) error {
	r.Warnings = append(r.Warnings, "Monte Carlo uncertainty needs thermometry noise estimates; not computed for ready dose maps")
	return nil
}

package review

import (
	"context"
	"io"
	"math"
	"math/rand/v2"
	"testing"

	"dosecover/dosemap"
)

// heatedSonication returns a phase+magnitude sonication on g: baseline 37
// °C, then temp(p) for frames 2..n-1, one frame per dt seconds, at 3 T, TE
// 12.8 ms (|dφ/dT| = 0.1027 rad/°C, testdata/check-values.md). Magnitude: a fixed
// pattern of mean 1000 (so frames correlate with the baseline) with
// Gaussian noise of sd 1000/snr; phase noise of sd 1/snr rad (seeded).
func heatedSonication(n int, g dosemap.Geometry, frames int, dt float64, temp func(p dosemap.Vec3) float64, snr float64, seed uint64) *dosemap.Sonication {
	r := rand.New(rand.NewPCG(seed, 7))
	prf := dosemap.PRF{Alpha: -0.01, B0: 3, TE: 0.0128, Sign: 1}
	ppd := prf.PhasePerDegree()
	so := &dosemap.Sonication{Number: n, Label: "heated", Geometry: g, B0: 3, TE: 0.0128}
	for f := 0; f < frames; f++ {
		ph := make([]float32, g.Len())
		mg := make([]float32, g.Len())
		for v := range ph {
			dT := 0.0
			if f >= 2 {
				dT = temp(g.Point(ijk(g, v))) - 37
			}
			x := ppd*dT + r.NormFloat64()/snr
			ph[v] = float32(math.Remainder(x, 2*math.Pi))
			p := g.Point(ijk(g, v))
			mg[v] = float32(1000 + 300*math.Cos(p[0]/4)*math.Cos(p[1]/6) + 1000/snr*r.NormFloat64())
		}
		so.Phase = append(so.Phase, ph)
		so.Magnitude = append(so.Magnitude, mg)
		so.Times = append(so.Times, float64(f)*dt)
	}
	return so
}

// TestThermometryPath: a hot ball at 57 °C (12 frames of 2 s) covering the
// target; peak temperature 57 °C within 4 noise sigmas (σ = 0.275 °C at SNR
// 50, testdata/check-values.md), time above 43 °C = 10 heated frames × 2 s = 20 s
// (rectangle rule), dose above 240 CEM43 everywhere in the target (57 °C
// for 20 s gives 2^14/3 ≈ 5461 CEM43, computed), frame quality reported.
func TestThermometryPath(t *testing.T) {
	g := thermoGrid(48, 48, 10)
	hot := func(p dosemap.Vec3) float64 {
		if p.Norm() < 9 {
			return 57
		}
		return 37
	}
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{heatedSonication(1, g, 12, 2, hot, 50, 1)},
		Structures:  []dosemap.Structure{sphereStructure("target", dosemap.Vec3{}, 5, 1.5, 0, 64, dosemap.RoleTarget)},
	}
	set := DefaultSettings()
	set.Trials = 8
	r := analyseCase(t, c, set)
	s := r.Sonications[0]
	if s.PeakTempC == nil || math.Abs(*s.PeakTempC-57) > 4*0.275+0.8 {
		// The peak is the maximum of many noisy voxels: allow 4 sigmas
		// plus the expected maximum of ~3000 Gaussian draws (3.5 σ ≈ 1 °C)
		t.Errorf("peak temperature %v, want 57", ptrString(s.PeakTempC))
	}
	if s.TimeAbove43S == nil || *s.TimeAbove43S != 20 {
		t.Errorf("time above 43 °C %v s, want 20", ptrString(s.TimeAbove43S))
	}
	if (*r.CoveredFraction) < 0.999 || r.D98 == nil || *r.D98 < 240 {
		t.Errorf("covered %.4f, D98 %v", (*r.CoveredFraction), ptrString(r.D98))
	}
	if len(r.Quality) != 1 || len(r.Quality[0].Frames) != 12 {
		t.Fatalf("quality %+v", r.Quality)
	}
	if r.CoveredFractionP05 == nil || *r.CoveredFractionP05 < 0.999 {
		t.Errorf("p05 %v, want 1", ptrString(r.CoveredFractionP05))
	}
	// The result encodes as JSON (no NaN or Inf escapes into it).
	if err := r.WriteJSON(io.Discard); err != nil {
		t.Errorf("JSON: %v", err)
	}
}

// TestMonteCarloUncertainty: a target half heated to just the lethal dose
// edge is uncertain; the percentiles bracket plausibly and repeat with the
// seed.
func TestMonteCarloUncertainty(t *testing.T) {
	g := thermoGrid(48, 48, 8)
	// Temperature falls linearly along x through the target; lethal
	// (240 CEM43 in 20 s) at about 52.49 °C (testdata/check-values.md).
	ramp := func(p dosemap.Vec3) float64 {
		if p.Norm() > 14 {
			return 37
		}
		return 52.49 - 0.5*p[0]
	}
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{heatedSonication(1, g, 12, 2, ramp, 30, 3)},
		Structures:  []dosemap.Structure{sphereStructure("target", dosemap.Vec3{}, 8, 1.5, 0, 64, dosemap.RoleTarget)},
	}
	set := DefaultSettings()
	set.Trials = 20
	ses, err := Prepare(context.Background(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	r1, err := ses.Analyze(context.Background(), set, nil)
	if err != nil {
		t.Fatal(err)
	}
	p05, p95 := r1.CoveredFractionP05, r1.CoveredFractionP95
	if p05 == nil || p95 == nil || *p05 > *p95 || *p05 <= 0 || *p95 >= 1 {
		t.Fatalf("p05 %v p95 %v", ptrString(p05), ptrString(p95))
	}
	if r1.Probability == nil {
		t.Fatal("no probability map")
	}
	// About half the target is lethal (ramp crosses the threshold near
	// x = 0): the median trial covers roughly half (±0.15, heuristic).
	if mid := (*p05 + *p95) / 2; math.Abs(mid-0.5) > 0.15 {
		t.Errorf("mid percentile %.3f, want about 0.5", mid)
	}
	t.Logf("covered %.3f p05 %.3f p95 %.3f; hole %+v", (*r1.CoveredFraction), *p05, *p95, r1.Holes[0])
	// Same seed: same figures from a fresh session.
	r2 := analyseCase(t, c, set)
	if *r2.CoveredFractionP05 != *p05 || *r2.CoveredFractionP95 != *p95 {
		t.Errorf("same seed gave p05 %v/%v p95 %v/%v", *r2.CoveredFractionP05, *p05, *r2.CoveredFractionP95, *p95)
	}
	if len(r1.Holes) == 0 || r1.Holes[0].Certainty == "" || r1.Holes[0].MeanProbability == nil {
		t.Errorf("holes %+v", r1.Holes)
	}
	// A threshold change reuses the trials.
	set.Threshold = 100
	r3, err := ses.Analyze(context.Background(), set, nil)
	if err != nil || r3.CoveredFractionP05 == nil || *r3.CoveredFractionP05 < *p05 {
		t.Errorf("lower threshold: %v %v", err, r3)
	}
}

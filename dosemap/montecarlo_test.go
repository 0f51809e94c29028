package dosemap

import (
	"math"
	"runtime"
	"testing"
)

// wrapped hides the package's fast path so MonteCarlo takes the general one.
type wrapped struct{ DoseModel }

func TestMonteCarloNoNoiseEqualsDose(t *testing.T) {
	// With Sigma 0 (or unknown) every trial is the plain sum of doses.
	a := constSeries(uniformTimes(31, 2), 44, 50, 37)
	b := constSeries(uniformTimes(11, 3), 45, float32(math.NaN()), 37)
	a.Sigma = []float32{0, 0, 0}
	b.Sigma = nanSlice(3)
	want, _ := SumDose(DefaultCEM43().Dose(a), DefaultCEM43().Dose(b))
	mask := []bool{true, true, false}
	n := 0
	err := MonteCarlo([]*TemperatureSeries{a, b}, DefaultCEM43(), mask, 3, 1, func(trial int, dose []float32) {
		n++
		for v := 0; v < 2; v++ {
			if dose[v] != want.Data[v] {
				t.Errorf("trial %d voxel %d: %g, want %g", trial, v, dose[v], want.Data[v])
			}
		}
		if !math.IsNaN(float64(dose[2])) {
			t.Errorf("voxel outside the mask: %g, want NaN", dose[2])
		}
	})
	if err != nil || n != 3 {
		t.Fatalf("err %v, %d trials", err, n)
	}
}

func TestMonteCarloLognormalMoments(t *testing.T) {
	// Reference: moments of the lognormal distribution. Above the break the
	// CEM43 rate is 2^(T−43); with T' = T + a·(Z0 + Z_t), a = σ/√2 (Z0
	// shared by the frames, see MonteCarlo), c = (a·ln2)², n frames:
	//   E[D]/D0  = e^c,
	//   E[D²]/D0² = e^(2c) · (e^(2c)/n + (1 − 1/n)·e^c).
	// 200 voxels × 100 trials (rectangle rule: n = 60 equal terms): the
	// standard error of the mean is ≈ 0.4 % (CV 0.53 over 20000 shared
	// draws), that of the CV about 1.5 %; tolerances 1.5 % and 6 %.
	// Independent frames would give a CV of 0.10: the test tells them apart.
	const nv, n = 200, 60
	temps := make([]float32, nv)
	for v := range temps {
		temps[v] = 52
	}
	ts := constSeries(uniformTimes(n+1, 1), temps...)
	ts.Sigma = make([]float32, nv)
	for v := range ts.Sigma {
		ts.Sigma[v] = 1
	}
	m := CEM43{Rule: RuleRectangle}
	d0 := math.Exp2(52 - 43) // CEM43 of 1 minute at 52 °C
	var sum, sum2 float64
	cnt := 0
	err := MonteCarlo([]*TemperatureSeries{ts}, m, nil, 100, 2026, func(_ int, dose []float32) {
		for _, d := range dose {
			x := float64(d) / d0
			sum += x
			sum2 += x * x
			cnt++
		}
	})
	if err != nil {
		t.Fatal(err)
	}
	a := 1 / math.Sqrt2
	c := a * math.Ln2 * a * math.Ln2
	wantMean := math.Exp(c)
	wantM2 := math.Exp(2*c) * (math.Exp(2*c)/n + (1-1.0/n)*math.Exp(c))
	wantCV := math.Sqrt(wantM2-wantMean*wantMean) / wantMean
	mean := sum / float64(cnt)
	cv := math.Sqrt(sum2/float64(cnt)-mean*mean) / mean
	if relErr(mean, wantMean) > 0.015 {
		t.Errorf("mean dose %g·D0, want %g·D0", mean, wantMean)
	}
	if relErr(cv, wantCV) > 0.06 {
		t.Errorf("coefficient of variation %g, want %g (independent frames would give %g)", cv, wantCV,
			math.Sqrt((math.Exp(4*c)-math.Exp(2*c))/n)/math.Exp(c))
	}
}

func TestMonteCarloReproducible(t *testing.T) {
	// Same seed, same numbers; the general path (any DoseModel) draws the
	// same noise as the fast path; another seed differs.
	ts := constSeries(uniformTimes(21, 2), 50, 52, 48, 55)
	ts.Sigma = []float32{0.5, 1, 2, 0.3}
	run := func(m DoseModel, seed uint64) [][]float32 {
		var out [][]float32
		if err := MonteCarlo([]*TemperatureSeries{ts, ts}, m, nil, 5, seed, func(_ int, d []float32) {
			out = append(out, append([]float32(nil), d...))
		}); err != nil {
			t.Fatal(err)
		}
		return out
	}
	a, b, c, w := run(DefaultCEM43(), 3), run(DefaultCEM43(), 3), run(DefaultCEM43(), 4), run(wrapped{DefaultCEM43()}, 3)
	for tr := range a {
		for v := range a[tr] {
			if a[tr][v] != b[tr][v] {
				t.Fatal("same seed gave different results")
			}
			if relErr(float64(w[tr][v]), float64(a[tr][v])) > 1e-6 {
				t.Fatalf("general path %g, fast path %g", w[tr][v], a[tr][v])
			}
		}
	}
	same := true
	for v := range a[0] {
		same = same && a[0][v] == c[0][v]
	}
	if same {
		t.Error("another seed gave the same trial")
	}
}

func TestLethalProbability(t *testing.T) {
	// Voxel 0: 60 s at 50 °C = 128 CEM43 ≪ 240, noise 0.2 °C: never lethal.
	// Voxel 1: 60 s at 53 °C = 1024 CEM43 ≫ 240: always lethal.
	// Voxel 2: 60 s at 50.91 °C ≈ 240 CEM43 (testdata/check-values.md) with σ = 0:
	// deterministic, lethal iff 2^(7.91) ≥ 240 (241 ≥ 240: yes).
	// Voxel 3: outside the mask → NaN.
	ts := constSeries(uniformTimes(61, 1), 50, 53, 50.91, 60)
	ts.Sigma = []float32{0.2, 0.2, 0, 0.2}
	p, err := LethalProbability([]*TemperatureSeries{ts}, DefaultCEM43(), 240, []bool{true, true, true, false}, 50, 9)
	if err != nil {
		t.Fatal(err)
	}
	if p.Data[0] != 0 || p.Data[1] != 1 || p.Data[2] != 1 || !math.IsNaN(float64(p.Data[3])) {
		t.Errorf("probability %v, want [0 1 1 NaN]", p.Data)
	}
	// Errors a user can cause.
	if _, err := LethalProbability(nil, DefaultCEM43(), 240, nil, 10, 1); err == nil {
		t.Error("no series accepted")
	}
	if _, err := LethalProbability([]*TemperatureSeries{ts}, DefaultCEM43(), 240, []bool{true}, 10, 1); err == nil {
		t.Error("short mask accepted")
	}
	if _, err := LethalProbability([]*TemperatureSeries{ts}, DefaultCEM43(), 240, nil, 0, 1); err == nil {
		t.Error("zero trials accepted")
	}
	other := constSeries(uniformTimes(3, 1), 1, 2, 3, 4, 5)
	if _, err := LethalProbability([]*TemperatureSeries{ts, other}, DefaultCEM43(), 240, nil, 2, 1); err == nil {
		t.Error("series on different grids accepted")
	}
}

func TestMonteCarloMaskIndependent(t *testing.T) {
	// A voxel's trials do not depend on the other voxels computed, nor on
	// the number of goroutines: a run over a sparse mask gives exactly the
	// numbers of the full run for its voxels, with 1 or 2 workers. 700
	// voxels span three chunks of the parallel split.
	temps := make([]float32, 700)
	for v := range temps {
		temps[v] = 40 + float32(v%37)/3
	}
	a := constSeries(uniformTimes(9, 2), temps...)
	b := constSeries(uniformTimes(6, 3), temps...)
	a.Sigma, b.Sigma = make([]float32, len(temps)), make([]float32, len(temps))
	for v := range temps {
		a.Sigma[v] = 0.2 + float32(v%5)/10
		b.Sigma[v] = 0.7
	}
	b.Frames[2][11] = float32(math.NaN())
	run := func(mask []bool) [][]float32 {
		var out [][]float32
		if err := MonteCarlo([]*TemperatureSeries{a, b}, DefaultCEM43(), mask, 4, 9, func(_ int, d []float32) {
			out = append(out, append([]float32(nil), d...))
		}); err != nil {
			t.Fatal(err)
		}
		return out
	}
	full := run(nil)
	mask := make([]bool, len(temps))
	for v := range mask {
		mask[v] = v%7 == 3 || v == 11
	}
	for _, procs := range []int{1, 2} {
		old := runtime.GOMAXPROCS(procs)
		sparse := run(mask)
		runtime.GOMAXPROCS(old)
		for tr := range full {
			for v, m := range mask {
				if m && sparse[tr][v] != full[tr][v] {
					t.Fatalf("GOMAXPROCS %d trial %d voxel %d: %g with the mask, %g without", procs, tr, v, sparse[tr][v], full[tr][v])
				}
			}
		}
	}
	if full[0][3] == full[1][3] {
		t.Error("two trials gave the same dose")
	}
	// A cut-out of the voxels 200..399 with their numbers in the whole
	// grid gives the numbers of the whole run, on both paths; without the
	// numbers it draws other noise.
	cut := func(ts *TemperatureSeries) *TemperatureSeries {
		c := constSeries(ts.Times, ts.Frames[0][200:400]...)
		for f := range c.Frames {
			copy(c.Frames[f], ts.Frames[f][200:400])
		}
		c.Sigma = append([]float32(nil), ts.Sigma[200:400]...)
		return c
	}
	ca, cb := cut(a), cut(b)
	ids := make([]int, 200)
	for v := range ids {
		ids[v] = 200 + v
	}
	for _, m := range []DoseModel{DefaultCEM43(), wrapped{DefaultCEM43()}} {
		var got, plain [][]float32
		if err := MonteCarloVoxels([]*TemperatureSeries{ca, cb}, m, nil, ids, 4, 9, func(_ int, d []float32) {
			got = append(got, append([]float32(nil), d...))
		}); err != nil {
			t.Fatal(err)
		}
		MonteCarlo([]*TemperatureSeries{ca, cb}, m, nil, 4, 9, func(_ int, d []float32) {
			plain = append(plain, append([]float32(nil), d...))
		})
		same := true
		for tr := range got {
			for v := range got[tr] {
				if relErr(float64(got[tr][v]), float64(full[tr][200+v])) > 1e-6 {
					t.Fatalf("%T trial %d cut-out voxel %d: %g, whole grid %g", m, tr, v, got[tr][v], full[tr][200+v])
				}
				same = same && plain[tr][v] == got[tr][v]
			}
		}
		if same {
			t.Errorf("%T: the cut-out without voxel numbers drew the same noise", m)
		}
	}
	if err := MonteCarloVoxels([]*TemperatureSeries{ca}, DefaultCEM43(), nil, ids[:10], 1, 1, func(int, []float32) {}); err == nil {
		t.Error("short voxel numbers accepted")
	}
}

// TestMonteCarloFreezesFarSeries checks the rule that lets a series enter
// a voxel's trials without noise (see MonteCarlo). Voxel 0 sees series B
// at 35 °C and is heated by series A (52 °C for 40 s: 2⁹·40/60 ≈ 341
// CEM43). B raised by 5σ (σ 1 °C) to 40 °C gives 0.25³·40/60 ≈ 0.010
// CEM43, below 10⁻⁴ of the total (0.034), so B enters without noise and
// draws nothing; as B comes first, A then draws exactly the numbers it
// draws alone, and every trial of [B, A] is the trial of [A] plus B's
// noiseless dose. Voxel 1 is heated by both (51 and 52 °C): B stays noisy,
// takes the first draws, and the trials differ from that sum. Reference:
// the rule's definition with CEM43 rates of Sapareto & Dewey (1984); the
// general path (any DoseModel) follows the same rule.
func TestMonteCarloFreezesFarSeries(t *testing.T) {
	a := constSeries(uniformTimes(21, 2), 52, 52)
	b := constSeries(uniformTimes(21, 2), 35, 51)
	a.Sigma = []float32{1, 1}
	b.Sigma = []float32{1, 1}
	nomB := DefaultCEM43().Dose(b)
	collect := func(m DoseModel, series ...*TemperatureSeries) [][]float32 {
		var out [][]float32
		if err := MonteCarlo(series, m, nil, 6, 5, func(_ int, d []float32) {
			out = append(out, append([]float32(nil), d...))
		}); err != nil {
			t.Fatal(err)
		}
		return out
	}
	for _, m := range []DoseModel{DefaultCEM43(), wrapped{DefaultCEM43()}} {
		both, alone := collect(m, b, a), collect(m, a)
		differs := false
		for tr := range both {
			want := float32(float64(alone[tr][0]) + float64(nomB.Data[0]))
			if relErr(float64(both[tr][0]), float64(want)) > 1e-6 {
				t.Errorf("%T trial %d voxel 0: %g, want A's trial plus B's noiseless dose %g", m, tr, both[tr][0], want)
			}
			sum1 := float32(float64(alone[tr][1]) + float64(nomB.Data[1]))
			differs = differs || relErr(float64(both[tr][1]), float64(sum1)) > 1e-3
		}
		if !differs {
			t.Errorf("%T voxel 1: series B entered without noise although it heats the voxel", m)
		}
	}
}

package dosemap

import (
	"math"
	"math/rand/v2"
	"reflect"
	"testing"
)

// TestCEMRates checks the rate R^(43 − T) of the CEM43 loop (the vector
// kernel where the processor has one, exp2 elsewhere) against math.Pow,
// the general-purpose reference: relative error at most 2e-13 (the
// kernel's polynomial truncates at 6e-15, exp2 is below 1e-13 by its doc
// comment, and the rest covers the rounding of both and of math.Pow).
// NaN stays NaN; temperatures whose exponent lies beyond ±1022 (far
// outside tissue) take exp2's 0 or +Inf. Lengths 0 to 13 cover the
// kernel's blocks of four and the tail.
func TestCEMRates(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	models := []CEM43{DefaultCEM43(), {Break: 42.5, RAbove: 0.45, RBelow: 0.2}}
	ref := func(c CEM43, x float32) float64 {
		v := float64(x)
		switch {
		case v != v:
			return v
		case v >= c.Break:
			return math.Pow(c.RAbove, 43-v)
		default:
			return math.Pow(c.RBelow, 43-v)
		}
	}
	check := func(c CEM43, T []float32) {
		t.Helper()
		f := make([]float64, len(T))
		c.rates(T, f)
		for n, x := range T {
			want := ref(c, x)
			got := f[n]
			switch {
			case want != want:
				if got == got {
					t.Fatalf("%v: T = %g gives %g, want NaN", c, x, got)
				}
			case want < 0x1p-1022 || math.IsInf(want, 0):
				// Beyond the exponent range: exp2 gives 0 below 2^-1022
				// (math.Pow gives subnormals there) and +Inf above.
				if !(got == 0 && float64(x) < 43 || math.IsInf(got, 1) && float64(x) > 43) {
					t.Fatalf("%v: T = %g gives %g, want %g", c, x, got, want)
				}
			default:
				if r := math.Abs(got-want) / want; !(r <= 2e-13) {
					t.Fatalf("%v: T = %g (lane %d of %d) gives %.17g, math.Pow %.17g: relative error %.2g",
						c, x, n, len(T), got, want, r)
				}
			}
		}
	}
	for _, c := range models {
		// Sapareto–Dewey by hand: R^(43−T) is 2 at 44 °C, 0.25 at 42 °C.
		f := make([]float64, 4)
		DefaultCEM43().rates([]float32{44, 42, 43, 45}, f)
		if f[0] != 2 || f[1] != 0.25 || f[2] != 1 || f[3] != 4 {
			t.Fatalf("rates(44, 42, 43, 45) = %v, want [2 0.25 1 4]", f)
		}
		for n := 0; n <= 13; n++ {
			T := make([]float32, n)
			for i := range T {
				T[i] = float32(-20 + 180*rng.Float64())
			}
			check(c, T)
		}
		// Many blocks with NaN, the break itself and its neighbours.
		T := make([]float32, 4099)
		for i := range T {
			switch rng.IntN(8) {
			case 0:
				T[i] = float32(math.NaN())
			case 1:
				T[i] = float32(c.Break)
			case 2:
				T[i] = math.Nextafter32(float32(c.Break), 0)
			default:
				T[i] = float32(20 + 50*rng.Float64())
			}
		}
		check(c, T)
		// Exponents beyond the kernel's range, in a block of four and in
		// the middle of a longer run (every lane is then computed again).
		for _, odd := range []float32{float32(math.Inf(1)), float32(math.Inf(-1)), 3000, -3000, 554.4, -468.1} {
			run := []float32{37, 41.5, odd, 60, 52, 43, 44, 45, 46}
			check(c, run)
		}
	}
}

// TestCEMRatesKernelCount checks the count of fine lanes the vector kernel
// returns, which decides whether its caller computes a run again.
func TestCEMRatesKernelCount(t *testing.T) {
	if !vectorKernels {
		t.Skip("no vector kernel on this processor")
	}
	c := DefaultCEM43()
	la, lb := -math.Log2(c.RAbove), -math.Log2(c.RBelow)
	for _, tc := range []struct {
		T    []float32
		fine int
	}{
		{[]float32{37, 50, float32(math.NaN()), 43}, 4},
		{[]float32{37, 3000, 43, 44, -3000, 40, 41, 42}, 6},
		{[]float32{float32(math.Inf(1)), float32(math.Inf(-1)), 43, 44}, 2},
		// y = 1·(554 − 43) = 511 and 2·(−468 − 43) = −1022: the first is
		// inside (−1022, 1023), the second on its open end.
		{[]float32{554, -468, 43, 43}, 3},
	} {
		f := make([]float64, len(tc.T))
		if got := cemRatesAVX2(&tc.T[0], &f[0], len(tc.T), c.Break, la, lb); got != tc.fine {
			t.Errorf("cemRatesAVX2(%v): %d fine lanes, want %d", tc.T, got, tc.fine)
		}
	}
}

// TestTrapezoidKernel checks trapezoid (the vector kernel in blocks of four
// where the processor has it) against trapezoidScalar, the voxel-by-voxel
// loop of the trapezoid rule that TestCEM43 checks against Sapareto and
// Dewey's worked values: the same sums, previous rates, valid flags and
// missing counts, to the last bit, step after step. Seeded rates with NaN
// (a missing frame), lengths that leave a tail.
func TestTrapezoidKernel(t *testing.T) {
	if !vectorKernels {
		t.Skip("no vector kernel on this processor: nothing to compare")
	}
	rng := rand.New(rand.NewPCG(41, 42))
	for _, n := range []int{1, 4, 6, 8, 1023} {
		accA, accB := make([]float64, n), make([]float64, n)
		prevA, prevB := make([]float64, n), make([]float64, n)
		gotA, gotB := make([]bool, n), make([]bool, n)
		missA, missB := make([]uint32, n), make([]uint32, n)
		f := make([]float64, n)
		for step := 0; step < 30; step++ {
			for i := range f {
				f[i] = math.Exp2(10 * rng.NormFloat64())
				if rng.IntN(7) == 0 {
					f[i] = math.NaN()
				}
			}
			h := 0.5 * (1 + rng.Float64()) / 60
			trapezoid(f, accA, prevA, gotA, missA, h)
			trapezoidScalar(f, accB, prevB, gotB, missB, h)
			for i := range f {
				if math.Float64bits(accA[i]) != math.Float64bits(accB[i]) || math.Float64bits(prevA[i]) != math.Float64bits(prevB[i]) ||
					gotA[i] != gotB[i] || missA[i] != missB[i] {
					t.Fatalf("n=%d step %d voxel %d: acc %g prev %g got %v missing %d; voxel by voxel %g %g %v %d",
						n, step, i, accA[i], prevA[i], gotA[i], missA[i], accB[i], prevB[i], gotB[i], missB[i])
				}
			}
		}
	}
}

// TestKernelsMatchScalarPipeline computes the CEM43 dose of phantom
// sonications (hot spot rising 45 °C, noisy magnitude, polynomial drift
// with the automatic reference; and a phase-only series) with the vector
// kernels and without: missing-frame counts equal, and the float32 dose
// (rates by another polynomial, each within 2e-13 of math.Pow, see
// TestCEMRates) within one float32 rounding step, 2^-23 relative. So the
// dose of a case, and an audit's shards run on processors with and
// without AVX2, can differ in the last digit of the dose, never more.
func TestKernelsMatchScalarPipeline(t *testing.T) {
	if !vectorKernels {
		t.Skip("no vector kernels on this processor: nothing to compare")
	}
	p := newPhantom(64, 16)
	p.rise = hotSpot(45, 3, 6)
	p.snr = 40
	p.drift = func(x, y float64, f int) float64 { return 0.02 * float64(f) * (1 + 0.01*x - 0.02*y) }
	for _, withMag := range []bool{true, false} {
		s := p.sonication(withMag)
		ts, err := Thermometry(s, DefaultThermometryOptions())
		if err != nil {
			t.Fatal(err)
		}
		dose := func(on bool) *DoseMap {
			defer setVectorKernels(setVectorKernels(on))
			return DefaultCEM43().Dose(ts)
		}
		dV, dS := dose(true), dose(false)
		if !reflect.DeepEqual(dV.Missing, dS.Missing) {
			t.Fatalf("magnitude %v: missing-frame counts differ", withMag)
		}
		lethal, differ := 0, 0
		for n, x := range dS.Data {
			y := dV.Data[n]
			if !(x == y || x != x && y != y || math.Abs(float64(y-x)) <= 0x1p-23*math.Abs(float64(x))) {
				t.Fatalf("magnitude %v voxel %d: dose %g with kernels, %g without", withMag, n, y, x)
			}
			if x != y {
				differ++
			}
			if x >= 240 {
				lethal++
			}
		}
		if lethal == 0 {
			t.Errorf("magnitude %v: no lethal voxel: the phantom does not exercise the dose", withMag)
		}
		t.Logf("magnitude %v: %d of %d voxels differ in the last bit of the dose", withMag, differ, len(dS.Data))
	}
}

// TestMaxIntoKernel checks the vector maximum against maxInto's scalar
// definition, dst = src > dst ? src : dst (IEEE 754 ordered comparison: a
// NaN compares false, +0 and −0 compare equal), bit for bit, on random
// values mixed with NaN, ±Inf and zeros of both signs, at lengths around
// the kernel's blocks of sixteen.
func TestMaxIntoKernel(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	special := []float32{float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1)), 0, float32(math.Copysign(0, -1))}
	draw := func() float32 {
		if rng.IntN(4) == 0 {
			return special[rng.IntN(len(special))]
		}
		return float32(rng.NormFloat64() * 20)
	}
	scalar := func(dst, src []float32) {
		for i := range dst {
			if src[i] > dst[i] {
				dst[i] = src[i]
			}
		}
	}
	for _, n := range []int{0, 1, 15, 16, 17, 31, 32, 33, 100, 1000} {
		dst := make([]float32, n)
		src := make([]float32, n+3) // longer than dst, as frames may be
		for i := range dst {
			dst[i] = draw()
		}
		for i := range src {
			src[i] = draw()
		}
		want := append([]float32(nil), dst...)
		scalar(want, src)
		maxInto(dst, src)
		for i := range dst {
			if math.Float32bits(dst[i]) != math.Float32bits(want[i]) {
				t.Fatalf("length %d, value %d: %v (bits %#x), want %v (bits %#x); vector kernels %v",
					n, i, dst[i], math.Float32bits(dst[i]), want[i], math.Float32bits(want[i]), vectorKernels)
			}
		}
	}
}

// TestTemperatureSeriesPeak checks Peak on a hand-made series of three
// frames: the highest valid value of each voxel, NaN where no frame is
// valid (worked by hand).
func TestTemperatureSeriesPeak(t *testing.T) {
	nan := float32(math.NaN())
	g := Geometry{Cols: 20, Rows: 1, Slices: 1, Spacing: Vec3{1, 1, 1}, Row: Vec3{1, 0, 0}, Col: Vec3{0, 1, 0}}
	frames := [][]float32{make([]float32, 20), make([]float32, 20), make([]float32, 20)}
	for i := range 20 {
		frames[0][i], frames[1][i], frames[2][i] = 37, 37, 37
	}
	// voxel 0: rises then falls; 1: NaN in the hottest frame; 2: never
	// valid; 17 (past the kernel's first block of 16): peak in the last
	// frame.
	frames[1][0], frames[2][0] = 55, 41
	frames[0][1], frames[1][1], frames[2][1] = 40, nan, 39
	frames[0][2], frames[1][2], frames[2][2] = nan, nan, nan
	frames[2][17] = 60
	ts := &TemperatureSeries{Geometry: g, Times: []float64{0, 3, 6}, Frames: frames}
	pk := ts.Peak().Data
	want := map[int]float32{0: 55, 1: 40, 3: 37, 16: 37, 17: 60, 19: 37}
	for i, w := range want {
		if pk[i] != w {
			t.Errorf("voxel %d: peak %v, want %v", i, pk[i], w)
		}
	}
	if pk[2] == pk[2] {
		t.Errorf("voxel 2 (never valid): peak %v, want NaN", pk[2])
	}
}

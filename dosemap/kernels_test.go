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

// TestUnwrapRunKernel checks unwrapRun (the vector kernel in blocks of four
// where the processor has it) against unwrapScalar, the voxel-by-voxel
// loop whose method is tested against Itoh's unwrapping in
// thermometry_test.go: equal to the last bit in out, last and turns, and
// the same count of changed turn counts, frame after frame. Seeded random
// phases within ±π and beyond (mappings in radians may exceed it), jumps
// of several turns, NaN phases and magnitudes, magnitudes on the
// threshold, and run lengths that leave a tail.
func TestUnwrapRunKernel(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	nan := float32(math.NaN())
	total := 0
	for _, n := range []int{1, 3, 4, 7, 8, 61, 1000} {
		ref := make([]float32, n)
		for i := range ref {
			ref[i] = float32(math.Pi * (2*rng.Float64() - 1))
		}
		lastA, lastB := make([]float32, n), make([]float32, n)
		turnsA, turnsB := make([]int16, n), make([]int16, n)
		outA, outB := make([]float32, n), make([]float32, n)
		v, mag := make([]float32, n), make([]float32, n)
		const thr = 0.25
		for f := 0; f < 12; f++ {
			for i := range v {
				switch r := rng.IntN(20); {
				case r == 0:
					v[i] = nan
				case r == 1:
					v[i] = float32(4 * math.Pi * (2*rng.Float64() - 1)) // beyond ±π
				case r < 5:
					v[i] = ref[i] + float32(rng.NormFloat64()*3) // jumps past ±π
				default:
					v[i] = float32(math.Remainder(float64(ref[i])+0.3*float64(f)+0.05*rng.NormFloat64(), 2*math.Pi))
				}
				switch r := rng.IntN(20); {
				case r == 0:
					mag[i] = nan
				case r == 1:
					mag[i] = thr
				case r == 2:
					mag[i] = math.Nextafter32(thr, 0)
				default:
					mag[i] = float32(rng.Float64() + thr)
				}
			}
			wa := unwrapRun(v, ref, lastA, turnsA, outA, mag, thr)
			wb := unwrapScalar(v, ref, lastB, turnsB, outB, mag, thr)
			total += wa
			if wa != wb {
				t.Fatalf("n=%d frame %d: %d turn changes, voxel by voxel %d", n, f, wa, wb)
			}
			for i := range v {
				if math.Float32bits(outA[i]) != math.Float32bits(outB[i]) || math.Float32bits(lastA[i]) != math.Float32bits(lastB[i]) || turnsA[i] != turnsB[i] {
					t.Fatalf("n=%d frame %d voxel %d (v %g, ref %g, mag %g): out %g last %g turns %d; voxel by voxel %g %g %d",
						n, f, i, v[i], ref[i], mag[i], outA[i], lastA[i], turnsA[i], outB[i], lastB[i], turnsB[i])
				}
			}
		}
	}
	if total < 100 {
		t.Errorf("only %d turn changes: the data do not exercise unwrapping", total)
	}
}

// TestConvertRowKernel checks convertRow (the vector kernel in blocks of
// four where the processor has it) against convertScalar, the voxel-by-
// voxel conversion tested against the PRF formula in thermometry_test.go:
// the temperatures equal to the last bit (NaN kept), the same count of
// valid voxels and the same hottest value and first position, the
// magnitude sum (taken in another order) within 1e-12 relative. Seeded
// rows with NaN, repeated maxima (ties), an entry value above part of the
// row, and lengths that leave a tail.
func TestConvertRowKernel(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	nan := float32(math.NaN())
	for _, n := range []int{1, 3, 4, 5, 8, 13, 128, 131} {
		for trial := 0; trial < 40; trial++ {
			u := make([]float32, n)
			x := make([]float64, n)
			ms := make([]float32, n)
			for i := range u {
				u[i] = float32(rng.NormFloat64() * 2)
				if rng.IntN(6) == 0 {
					u[i] = nan
				}
				x[i] = 2*float64(i)/float64(max(n-1, 1)) - 1
				ms[i] = float32(100 + 50*rng.Float64())
			}
			if trial%3 == 0 && n > 4 {
				// Ties for the hottest: in the same lane and in others.
				p := rng.IntN(n - 4)
				u[p], u[p+4], u[rng.IntN(n)] = 9, 9, 9
			}
			k := [4]float64{1 / 0.4, 37 + rng.Float64(), 0.1 * rng.NormFloat64(), 0.05 * rng.NormFloat64()}
			if trial%3 == 0 {
				k[2], k[3] = 0, 0 // no drift along the row: equal phases, equal temperatures
			}
			hot := float32(math.Inf(-1))
			if trial%2 == 1 {
				hot = 40 // above part of the row
			}
			ua, ub := append([]float32(nil), u...), append([]float32(nil), u...)
			sa, va, ba, aa := convertRow(ua, x, ms, k, hot)
			sb, vb, bb, ab := convertScalar(ub, x, ms, k, hot)
			for i := range ua {
				if math.Float32bits(ua[i]) != math.Float32bits(ub[i]) {
					t.Fatalf("n=%d trial %d voxel %d: %g, voxel by voxel %g", n, trial, i, ua[i], ub[i])
				}
			}
			if va != vb || aa != ab || math.Float32bits(ba) != math.Float32bits(bb) {
				t.Fatalf("n=%d trial %d: valid %d hottest %g at %d; voxel by voxel %d, %g at %d", n, trial, va, ba, aa, vb, bb, ab)
			}
			if !(math.Abs(sa-sb) <= 1e-12*math.Abs(sb)) {
				t.Fatalf("n=%d trial %d: magnitude sum %.17g, voxel by voxel %.17g", n, trial, sa, sb)
			}
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

// TestKernelsMatchScalarPipeline runs thermometry and the CEM43 dose of
// phantom sonications (hot spot rising 45 °C, past the phase wrap limit,
// noisy magnitude, polynomial drift with the automatic reference; and a
// phase-only series) with the vector kernels and without: temperatures,
// noise, wraps, invalid counts, hottest voxels, drift and motion equal to
// the last bit; the frame SNR (magnitudes summed in another order) within
// 1e-12 relative, and the float32 dose (rates by another polynomial, each
// within 2e-13 of math.Pow, see TestCEMRates) within one float32 rounding
// step, 2^-23 relative. Without the kernels the scalar loops run, as on
// processors without AVX2.
func TestKernelsMatchScalarPipeline(t *testing.T) {
	p := newPhantom(64, 16)
	p.rise = hotSpot(45, 3, 6)
	p.snr = 40
	p.drift = func(x, y float64, f int) float64 { return 0.02 * float64(f) * (1 + 0.01*x - 0.02*y) }
	for _, withMag := range []bool{true, false} {
		s := p.sonication(withMag)
		// A few NaN phases (voxels the scanner did not reconstruct).
		for f := 4; f < len(s.Phase); f += 5 {
			for n := 100 * f; n < 100*f+37; n++ {
				s.Phase[f][n] = float32(math.NaN())
			}
		}
		run := func(on bool) (*TemperatureSeries, *DoseMap) {
			defer setVectorKernels(setVectorKernels(on))
			ts, err := Thermometry(s, DefaultThermometryOptions())
			if err != nil {
				t.Fatal(err)
			}
			return ts, DefaultCEM43().Dose(ts)
		}
		tsV, dV := run(true)
		tsS, dS := run(false)
		wraps := 0
		for f := range tsS.Frames {
			for n, x := range tsS.Frames[f] {
				if math.Float32bits(tsV.Frames[f][n]) != math.Float32bits(x) {
					t.Fatalf("magnitude %v frame %d voxel %d: %g with kernels, %g without", withMag, f, n, tsV.Frames[f][n], x)
				}
			}
			qv, qs := tsV.Quality[f], tsS.Quality[f]
			wraps += qs.Wraps
			snrV, snrS := qv.SNR, qs.SNR
			qv.SNR, qs.SNR = 0, 0
			if qv.Motion != qv.Motion && qs.Motion != qs.Motion {
				qv.Motion, qs.Motion = 0, 0 // both unknown (no magnitude)
			}
			if !reflect.DeepEqual(qv, qs) {
				t.Fatalf("magnitude %v frame %d: quality %+v with kernels, %+v without", withMag, f, qv, qs)
			}
			if !(snrV == snrS || snrV != snrV && snrS != snrS || math.Abs(snrV-snrS) <= 1e-12*math.Abs(snrS)) {
				t.Fatalf("magnitude %v frame %d: SNR %.17g with kernels, %.17g without", withMag, f, snrV, snrS)
			}
		}
		if wraps == 0 {
			t.Errorf("magnitude %v: no phase wraps: the phantom does not exercise unwrapping", withMag)
		}
		for n, x := range tsS.Sigma {
			if math.Float32bits(tsV.Sigma[n]) != math.Float32bits(x) {
				t.Fatalf("magnitude %v voxel %d: sigma %g with kernels, %g without", withMag, n, tsV.Sigma[n], x)
			}
		}
		if !reflect.DeepEqual(dV.Missing, dS.Missing) {
			t.Fatalf("magnitude %v: missing-frame counts differ", withMag)
		}
		lethal := 0
		for n, x := range dS.Data {
			y := dV.Data[n]
			if !(x == y || x != x && y != y || math.Abs(float64(y-x)) <= 0x1p-23*math.Abs(float64(x))) {
				t.Fatalf("magnitude %v voxel %d: dose %g with kernels, %g without", withMag, n, y, x)
			}
			if x >= 240 {
				lethal++
			}
		}
		if lethal == 0 {
			t.Errorf("magnitude %v: no lethal voxel: the phantom does not exercise the dose", withMag)
		}
	}
}

//go:build amd64 && !purego

package dosemap

import "golang.org/x/sys/cpu"

// hasVectorKernels reports whether the processor can run the vector
// kernels of this file: they need AVX2 and FMA.
var hasVectorKernels = cpu.X86.HasAVX2 && cpu.X86.HasFMA

// vectorKernels reports whether the vector kernels are used.
var vectorKernels = hasVectorKernels

// setVectorKernels turns the vector kernels on (where the processor has
// them) or off and returns the previous setting (for tests that compare
// both paths).
func setVectorKernels(on bool) bool {
	old := vectorKernels
	vectorKernels = on && hasVectorKernels
	return old
}

// cemRatesAVX2 writes f[i] = 2^(e·(t[i] − 43)) for i < n, four at a time
// (n a multiple of 4), with e = la where t[i] ≥ brk and lb elsewhere; a NaN
// temperature gives NaN. 2^y is split as 2^k·2^r, k = round(y), |r| ≤ ½,
// and 2^r = e^s, s = r·ln 2, by its Taylor polynomial of degree 11
// (truncation below (ln 2/2)¹²/12! ≈ 6e-15, Horner with fused
// multiply-adds). It returns the number of lanes whose y is finite and
// inside (−1022, 1023) or NaN; the others (far outside any tissue
// temperature) hold garbage and are computed again by the caller.
//
//go:noescape
func cemRatesAVX2(t *float32, f *float64, n int, brk, la, lb float64) (fine int)

// unwrapAVX2 is unwrapRun for n voxels (n a multiple of 4), four at a
// time, with the operations of unwrapScalar in the same order and
// rounding (no fused multiply-add), so to the same values.
//
//go:noescape
func unwrapAVX2(v, ref, last *float32, turns *int16, out, mag *float32, n int, thr float32) (wraps int)

// convertAVX2 is convertRow for n voxels (n a multiple of 4), four at a
// time, the temperatures with the operations of convertScalar in the same
// order and rounding (no fused multiply-add). best and at hold, per lane
// (voxels l, l+4, l+8, ...), the largest converted value above the value
// they hold on entry and its first position (at unchanged when none); the
// magnitude sum is taken in four lanes.
//
//go:noescape
func convertAVX2(u *float32, x *float64, ms *float32, n int, k *[4]float64, best *[4]float32, at *[4]int32) (msum float64, valid int)

// trapezoidAVX2 is trapezoid for n voxels (n a multiple of 4), four at a
// time, with the product and the sum rounded separately as in
// trapezoidScalar.
//
//go:noescape
func trapezoidAVX2(f, acc, prev *float64, got *bool, miss *uint32, n int, h float64)

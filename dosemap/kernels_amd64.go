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

// trapezoidAVX2 is trapezoid for n voxels (n a multiple of 4), four at a
// time, with the product and the sum rounded separately as in
// trapezoidScalar.
//
//go:noescape
func trapezoidAVX2(f, acc, prev *float64, got *bool, miss *uint32, n int, h float64)

// maxIntoAVX2 is maxInto for n values (n a multiple of 16), eight at a
// time.
//
//go:noescape
func maxIntoAVX2(dst, src *float32, n int)

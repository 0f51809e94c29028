//go:build amd64 && !purego

package dicomio

import "golang.org/x/sys/cpu"

// vectorDecode reports whether decode16AVX2 is used (where the processor
// has AVX2).
var vectorDecode = cpu.X86.HasAVX2

// setVectorDecode turns the vector kernel on (where the processor has
// AVX2) or off and returns the previous setting (for tests that compare
// both paths).
func setVectorDecode(on bool) bool {
	old := vectorDecode
	vectorDecode = on && cpu.X86.HasAVX2
	return old
}

// decode16AVX2 converts n stored values (n a multiple of 8) in 16-bit
// little-endian words at src into dst, eight at a time:
//
//	v = (word << up) >> ext   (arithmetic shift when signed, else logical)
//	dst[i] = float32(float64(v)·a + b)
//
// with up = 31 − HighBit and ext = 32 − BitsStored, the product and the
// sum rounded separately, as decodeFrame computes them (the same float32
// values, bit for bit).
//
//go:noescape
func decode16AVX2(src *byte, dst *float32, n int, up, ext uint64, signed bool, a, b float64)

//go:build !amd64 || purego

package dicomio

// vectorDecode is false: no vector kernel on this architecture.
const vectorDecode = false

// setVectorDecode does nothing here: there is no kernel to turn on.
func setVectorDecode(on bool) bool { return false }

func decode16AVX2(src *byte, dst *float32, n int, up, ext uint64, signed bool, a, b float64) {
	panic("dicomio: no vector kernel")
}

//go:build !amd64 || purego

package dosemap

// vectorKernels is false: no vector kernels on this architecture.
const vectorKernels = false

// setVectorKernels does nothing here: there are no kernels to turn on.
func setVectorKernels(on bool) bool { return false }

func cemRatesAVX2(t *float32, f *float64, n int, brk, la, lb float64) int {
	panic("dosemap: no vector kernel")
}

func trapezoidAVX2(f, acc, prev *float64, got *bool, miss *uint32, n int, h float64) {
	panic("dosemap: no vector kernel")
}

func maxIntoAVX2(dst, src *float32, n int) {
	panic("dosemap: no vector kernel")
}

//go:build !amd64 || purego

package dosemap

// vectorRates is false: no vector kernel on this architecture.
const vectorRates = false

func cemRatesAVX2(t *float32, f *float64, n int, brk, la, lb float64) int {
	panic("dosemap: no vector kernel")
}

package report

import (
	"io"
	"testing"
)

// BenchmarkRenderPNG renders and encodes the sample page at several
// resolutions; time should grow about with the pixel count (dpi²).
func BenchmarkRenderPNG(b *testing.B) {
	in := sampleInput()
	for _, dpi := range []int{100, 150, 300} {
		b.Run(itoa(dpi)+"dpi", func(b *testing.B) {
			for b.Loop() {
				if err := RenderPNG(io.Discard, in, dpi); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkRenderPDF writes the sample page as PDF.
func BenchmarkRenderPDF(b *testing.B) {
	in := sampleInput()
	for b.Loop() {
		if err := RenderPDF(io.Discard, in); err != nil {
			b.Fatal(err)
		}
	}
}

func itoa(n int) string {
	s := ""
	for n > 0 {
		s = string(rune('0'+n%10)) + s
		n /= 10
	}
	return s
}

//go:build cgo

package main

import (
	"fmt"
	"testing"
)

// BenchmarkViewerDraw measures one redraw of the acquisition view of the
// synthetic phantom (anatomy, dose wash, isoline, contours, holes), as
// done on every slice change, at several display sizes.
func BenchmarkViewerDraw(b *testing.B) {
	for _, size := range []int{256, 512, 1024} {
		b.Run(fmt.Sprintf("%dpx", size), func(b *testing.B) {
			rw := benchWindow(b)
			v := rw.viewers[0]
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				v.slice = (v.slice + 1) % v.slices() // a new plane each time: no cache reuse
				v.draw(size, size)
			}
		})
	}
}

// BenchmarkReanalyse measures leaving one sonication out of the synthetic
// phantom (Session.Analyze through the window's adapter).
func BenchmarkReanalyse(b *testing.B) {
	rw := benchWindow(b)
	s := rw.settings
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		s.Excluded = []int{1 + i%3}
		if _, err := rw.sess.Analyze(b.Context(), s); err != nil {
			b.Fatal(err)
		}
	}
}

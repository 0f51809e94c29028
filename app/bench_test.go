//go:build cgo

package main

import (
	"fmt"
	"testing"
)

// BenchmarkViewerDraw measures one redraw of the acquisition view of the
// synthetic phantom (anatomy, dose wash, isoline, contours, holes) at
// several display sizes, for each way the view changes:
//
//	first  a slice shown for the first time by a new viewer (nothing cached)
//	slice  a slice change (the slice's plane is sampled and traced anew)
//	pan    a pan of 1 mm (the slice's plane is reused)
//	zoom   a zoom between 1.5× and 1.65× (the slice's plane is reused)
//	step   a step to the next slice after the viewer prepared it in the
//	       background (as when scrolling through the slices)
//
// The first four run without the background preparation of neighbouring
// slices. Besides wall time (of the drawing alone) it reports the process
// CPU time per redraw (cpu-ms/op, which for step includes the background
// preparation), steadier on a machine shared with other work.
func BenchmarkViewerDraw(b *testing.B) {
	rw := benchWindow(b)
	v := rw.viewers[0]
	defer func(p bool) { prefetchSlices = p }(prefetchSlices)
	for _, size := range []int{256, 512, 1024} {
		for _, mode := range []string{"first", "slice", "pan", "zoom", "step"} {
			b.Run(fmt.Sprintf("%dpx/%s", size, mode), func(b *testing.B) {
				prefetchSlices = mode == "step"
				v.cache = nil
				v.zoom, v.panU, v.panV = 1.5, 0, 0
				v.slice = v.slices() / 2
				v.draw(size, size)
				wait := func() {
					if sv, ok := v.cache.(*sharedView); ok {
						sv.wg.Wait()
					}
				}
				wait()
				b.ReportAllocs()
				b.ResetTimer()
				c0 := cpuTime()
				for i := 0; i < b.N; i++ {
					switch mode {
					case "first":
						v.cache = nil
						v.slice = v.slices()/2 + i%2
					case "slice", "step":
						v.slice = (v.slice + 1) % v.slices()
					case "pan":
						v.panU = float64(i%2) - 0.5
					case "zoom":
						v.zoom = 1.5 * (1 + 0.1*float64(i%2))
					}
					v.draw(size, size)
					if mode == "step" {
						b.StopTimer()
						wait()
						b.StartTimer()
					}
				}
				b.StopTimer()
				if c := cpuTime(); c > 0 {
					b.ReportMetric(float64(c-c0)/float64(b.N)/1e6, "cpu-ms/op")
				}
			})
		}
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

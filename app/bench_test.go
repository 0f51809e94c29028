//go:build cgo

package main

import (
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"testing"
	"time"

	"dosecover/dosemap/sim"
	"dosecover/dosemap/testkit"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/test"
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
				c0 := testkit.CPUTime()
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
				if c := testkit.CPUTime(); c > 0 {
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

// BenchmarkOpenCase measures the window's whole load path without a
// display (fyne's test driver): opening a simulated session's folder as
// File ▸ Open does (input hash, reading, thermometry and dose, analysis
// with the default settings, the case on screen) and the peak temperature
// the hover readout uses, for the typical session cut to 6, 12 and 24
// sonications of 14 frames (about 1 000, 2 000 and 4 000 files; 12 and
// 24 skipped with -short). Beside wall time it reports the process CPU
// time per open (cpu-ms/op) and the heap the window holds once the case
// is open (live-MB: the heap after a garbage collection less the heap
// before the first open). The sessions are written
// once per run into a temporary folder, or into
// $DOSECOVER_WINDOW_BENCH_DIR/sN and reused.
func BenchmarkOpenCase(b *testing.B) {
	for _, ns := range []int{6, 12, 24} {
		b.Run(fmt.Sprintf("sonications=%d", ns), func(b *testing.B) {
			if testing.Short() && ns > 6 {
				b.Skip("writing the session takes long; skipped with -short")
			}
			dir := benchSession(b, ns)
			records := b.TempDir()
			old := reviewsDir
			reviewsDir = func() (string, error) { return records, nil }
			defer func() { reviewsDir = old }()
			a := test.NewTempApp(b)
			rw := newReviewWindow(a)
			rw.win.Resize(fyne.NewSize(1560, 940))
			defer rw.win.Close()
			live := func() float64 {
				runtime.GC()
				var ms runtime.MemStats
				runtime.ReadMemStats(&ms)
				return float64(ms.HeapAlloc) / (1 << 20)
			}
			before := live()
			b.ResetTimer()
			c0 := testkit.CPUTime()
			for i := 0; i < b.N; i++ {
				mark, aux := rw.completed.Load(), rw.auxDone.Load()
				fyne.DoAndWait(func() { rw.openCase(dir) })
				// The read, then the analysis; then the peak temperature.
				for rw.completed.Load() < mark+2 || rw.auxDone.Load() < aux+1 {
					time.Sleep(2 * time.Millisecond)
				}
				if rw.result == nil || len(rw.result.SonRows) != ns {
					b.Fatalf("no analysis of %d sonications: %s", ns, rw.status.Text)
				}
			}
			b.StopTimer()
			if c := testkit.CPUTime(); c > 0 {
				b.ReportMetric(float64(c-c0)/float64(b.N)/1e6, "cpu-ms/op")
			}
			b.ReportMetric(live()-before, "live-MB")
		})
	}
}

// benchSession returns the folder of the typical simulated session cut to
// ns sonications, writing it first when needed.
func benchSession(b *testing.B, ns int) string {
	b.Helper()
	root := os.Getenv("DOSECOVER_WINDOW_BENCH_DIR")
	if root == "" {
		root = b.TempDir()
	}
	dir := filepath.Join(root, fmt.Sprintf("s%d", ns))
	if _, err := os.Stat(filepath.Join(dir, sim.TruthFile)); err == nil {
		return dir
	}
	s := sim.TypicalSession(1)
	s.Sonications = s.Sonications[:ns]
	if err := os.MkdirAll(dir, 0o755); err != nil {
		b.Fatal(err)
	}
	if _, err := sim.WriteSession(dir, s); err != nil {
		b.Fatal(err)
	}
	return dir
}

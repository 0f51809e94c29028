package dicomio

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"runtime"
	"runtime/metrics"
	"sync"
	"testing"
	"time"

	"dosecover/dosemap/testkit"

	"github.com/suyashkumar/dicom"
)

// The reading benchmarks use one folder of 4000 single-frame 128×128
// 16-bit MR files (a phase series of 8 slices × 500 time points), written
// once with the DICOM library's writer and removed by TestMain.
const (
	benchFiles  = 4000
	benchSlices = 8
	benchSide   = 128
)

var (
	benchOnce sync.Once
	benchDir  string
	benchErr  error
)

func TestMain(m *testing.M) {
	code := m.Run()
	if benchDir != "" {
		os.RemoveAll(benchDir)
	}
	os.Exit(code)
}

func benchFolder(b *testing.B) string {
	b.Helper()
	benchOnce.Do(func() {
		benchDir, benchErr = os.MkdirTemp("", "dosecover-bench-")
		if benchErr != nil {
			return
		}
		mrSpec{Dir: benchDir, SeriesUID: "2.25.801", Desc: "bench phase", FoR: testFoR, Number: 1,
			Cols: benchSide, Rows: benchSide, Slices: benchSlices, Times: benchFiles / benchSlices,
			Spacing: 1.5, SliceGap: 3, Components: []string{"P"}, StartSec: 3600, DT: 2, TPI: true, B0: 3, TE: 12,
			Value: func(_ string, i, j, k, t int) int { return (i*31 + j*17 + k + t) & 0xFFFF }}.write(b)
	})
	if benchErr != nil {
		b.Fatal(benchErr)
	}
	return benchDir
}

func benchPaths(b *testing.B) []string {
	dir := benchFolder(b)
	paths, err := listFiles(dir)
	if err != nil || len(paths) != benchFiles {
		b.Fatalf("%d files, %v", len(paths), err)
	}
	return paths
}

// parallelFiles runs fn over paths with workers goroutines.
func parallelFiles(paths []string, workers int, fn func(p string)) {
	var wg sync.WaitGroup
	ch := make(chan string)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for p := range ch {
				fn(p)
			}
		}()
	}
	for _, p := range paths {
		ch <- p
	}
	close(ch)
	wg.Wait()
}

// readFileTime times plain os.ReadFile of the same files with 2 workers;
// the benchmarks run it right after each measured pass so that the ratio
// compares like with like on a shared machine.
func readFileTime(paths []string) (wall, cpu time.Duration) {
	start, c0 := time.Now(), testkit.CPUTime()
	parallelFiles(paths, 2, func(p string) { os.ReadFile(p) })
	return time.Since(start), testkit.CPUTime() - c0
}

// passTimes accumulates the wall and CPU time of the measured passes and
// of the os.ReadFile reference run after each.
type passTimes struct {
	wall, cpu, baseWall, baseCPU time.Duration
	peak                         uint64
}

// measure runs one measured pass (fn, with the peak heap sampled) and then,
// with the timer stopped, the os.ReadFile reference.
func (pt *passTimes) measure(b *testing.B, paths []string, fn func()) {
	start, c0 := time.Now(), testkit.CPUTime()
	p := peakHeap(fn)
	pt.wall += time.Since(start)
	pt.cpu += testkit.CPUTime() - c0
	pt.peak = max(pt.peak, p)
	b.StopTimer()
	w, c := readFileTime(paths)
	pt.baseWall += w
	pt.baseCPU += c
	b.StartTimer()
}

// withFast runs the benchmark body as two sub-benchmarks, "direct" (the
// direct attribute reader of fastattrs.go) and "library" (every file
// through the DICOM library).
func withFast(b *testing.B, body func(b *testing.B)) {
	for _, on := range []bool{true, false} {
		name := "direct"
		if !on {
			name = "library"
		}
		b.Run(name, func(b *testing.B) {
			defer func(v bool) { fastAttrs = v }(fastAttrs)
			fastAttrs = on
			body(b)
		})
	}
}

// peakHeap samples the live heap every millisecond while fn runs and
// returns the peak in bytes above the heap at the start.
func peakHeap(fn func()) uint64 {
	runtime.GC()
	sample := []metrics.Sample{{Name: "/memory/classes/heap/objects:bytes"}}
	read := func() uint64 { metrics.Read(sample); return sample[0].Value.Uint64() }
	base := read()
	var peak uint64
	stop := make(chan struct{})
	done := make(chan struct{})
	go func() {
		t := time.NewTicker(time.Millisecond)
		defer t.Stop()
		for {
			if v := read(); v > peak {
				peak = v
			}
			select {
			case <-stop:
				close(done)
				return
			case <-t.C:
			}
		}
	}()
	fn()
	close(stop)
	<-done
	if v := read(); v > peak {
		peak = v
	}
	if peak < base {
		return 0
	}
	return peak - base
}

// report gives files/s by wall time and by CPU time, the ratios to
// os.ReadFile of the same files (x_ReadFile by wall time, x_ReadFile_cpu by
// CPU time: above 1 is faster than plain reading) and the peak heap over
// the 16-bit pixel bytes.
func report(b *testing.B, paths []string, pt *passTimes) {
	files := float64(len(paths) * b.N)
	b.ReportMetric(files/pt.wall.Seconds(), "files/s")
	b.ReportMetric(pt.baseWall.Seconds()/pt.wall.Seconds(), "x_ReadFile")
	if pt.cpu > 0 && pt.baseCPU > 0 {
		b.ReportMetric(files/pt.cpu.Seconds(), "files/cpu-s")
		b.ReportMetric(pt.baseCPU.Seconds()/pt.cpu.Seconds(), "x_ReadFile_cpu")
	}
	pixelBytes := float64(len(paths) * benchSide * benchSide * 2)
	b.ReportMetric(float64(pt.peak)/pixelBytes, "peak/pixelbytes")
}

// BenchmarkReadFile is the reference: os.ReadFile of every file, 2 workers.
func BenchmarkReadFile(b *testing.B) {
	paths := benchPaths(b)
	b.ResetTimer()
	start := time.Now()
	for n := 0; n < b.N; n++ {
		parallelFiles(paths, 2, func(p string) { os.ReadFile(p) })
	}
	b.ReportMetric(float64(len(paths)*b.N)/time.Since(start).Seconds(), "files/s")
}

// BenchmarkLibraryParse is the DICOM library's default parse (pixels
// processed into frames), 2 workers, for comparison.
func BenchmarkLibraryParse(b *testing.B) {
	paths := benchPaths(b)
	b.ResetTimer()
	start := time.Now()
	for n := 0; n < b.N; n++ {
		parallelFiles(paths, 2, func(p string) {
			data, _ := os.ReadFile(p)
			dicom.Parse(bytes.NewReader(data), int64(len(data)), nil)
		})
	}
	b.ReportMetric(float64(len(paths)*b.N)/time.Since(start).Seconds(), "files/s")
}

// BenchmarkScan is the inventory pass (attributes only), 2 workers, with
// the direct attribute reader and with the library alone.
func BenchmarkScan(b *testing.B) {
	paths := benchPaths(b)
	dir := benchFolder(b)
	withFast(b, func(b *testing.B) {
		var pt passTimes
		for n := 0; n < b.N; n++ {
			pt.measure(b, paths, func() {
				inv, err := ScanOptions(context.Background(), dir, LoadOptions{Workers: 2}, nil)
				if err != nil || len(inv.Sonications) != 1 {
					b.Fatalf("scan: %v", err)
				}
			})
		}
		report(b, paths, &pt)
	})
}

// BenchmarkLoad reads attributes and pixels of every file into one
// sonication of 500 phase frames, 2 workers, with the direct attribute
// reader and with the library alone. The float32 result alone is twice the
// 16-bit pixel bytes; "transient/pixelbytes" is the peak heap above the
// result.
func BenchmarkLoad(b *testing.B) {
	paths := benchPaths(b)
	dir := benchFolder(b)
	withFast(b, func(b *testing.B) {
		var pt passTimes
		for n := 0; n < b.N; n++ {
			pt.measure(b, paths, func() {
				c, _, err := Load(context.Background(), dir, LoadOptions{Workers: 2}, nil)
				if err != nil || len(c.Sonications) != 1 || c.Sonications[0].Frames() != benchFiles/benchSlices {
					b.Fatalf("load: %v", err)
				}
			})
		}
		report(b, paths, &pt)
		result := float64(benchFiles * benchSide * benchSide * 4)
		b.ReportMetric((float64(pt.peak)-result)/float64(benchFiles*benchSide*benchSide*2), "transient/pixelbytes")
	})
}

// BenchmarkDecodeFrame converts one frame of stored 16-bit values to
// float32 at several image sizes: unsigned 16-bit values directly, signed
// 12-bit ones (the phase of a sonication) through a value table.
func BenchmarkDecodeFrame(b *testing.B) {
	for _, side := range []int{64, 128, 256, 512} {
		for _, signed := range []bool{false, true} {
			b.Run(fmt.Sprintf("%dx%d/signed=%v", side, side, signed), func(b *testing.B) {
				fi := &fileInfo{Rows: side, Cols: side, BitsAllocated: 16, BitsStored: 16, HighBit: 15, Samples: 1}
				if signed {
					fi.PixelRep, fi.BitsStored, fi.HighBit = 1, 12, 11
				}
				fi.Pixels = make([]byte, side*side*2)
				for n := range fi.Pixels {
					fi.Pixels[n] = byte(n * 7)
				}
				dst := make([]float32, side*side)
				b.SetBytes(int64(len(fi.Pixels)))
				var tabs *valueTables
				if signed {
					tabs = &valueTables{} // 12 bits: by table, as frames of a sonication are
				}
				for n := 0; n < b.N; n++ {
					fi.decodeFrame(0, dst, 0.5, -3, tabs)
				}
			})
		}
	}
}

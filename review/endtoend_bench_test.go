package review

import (
	"context"
	"io/fs"
	"os"
	"path/filepath"
	"sync"
	"testing"
	"time"

	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/dosemap/testkit"
)

// The end-to-end benchmark reads the typical simulated session (24
// sonications × 14 frames, 6 slices of 128×128, magnitude and phase:
// about 4000 DICOM files) written once per test binary run into a
// temporary folder, removed when the benchmark ends; or, when the
// environment variable DOSECOVER_TYPICAL_DIR names a folder, written there
// once and reused by later runs.
var (
	typicalOnce  sync.Once
	typicalDir   string // temporary folder to remove
	typicalRoot  string
	typicalFiles []string
	typicalErr   error
)

func typicalFolder(b *testing.B) (string, []string) {
	b.Helper()
	if testing.Short() {
		b.Skip("writing the typical session takes about 20 s; skipped with -short")
	}
	typicalOnce.Do(func() {
		dir, keep := os.LookupEnv("DOSECOVER_TYPICAL_DIR")
		if keep {
			if _, err := os.Stat(filepath.Join(dir, "truth.json")); err != nil {
				_, typicalErr = sim.WriteTypical(dir, 1)
			}
		} else {
			if dir, typicalErr = os.MkdirTemp("", "dosecover-typical-"); typicalErr != nil {
				return
			}
			typicalDir = dir // removed by TestMain
			_, typicalErr = sim.WriteTypical(dir, 1)
		}
		if typicalErr != nil {
			return
		}
		typicalRoot = dir
		typicalErr = filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
			if err == nil && d.Type().IsRegular() {
				typicalFiles = append(typicalFiles, p)
			}
			return err
		})
	})
	if typicalErr != nil {
		b.Fatal(typicalErr)
	}
	return typicalRoot, typicalFiles
}

// readAllFiles reads every file with os.ReadFile on two goroutines: the
// floor for any DICOM reader on this machine.
func readAllFiles(paths []string) {
	var wg sync.WaitGroup
	ch := make(chan string)
	for w := 0; w < 2; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for p := range ch {
				os.ReadFile(p)
			}
		}()
	}
	for _, p := range paths {
		ch <- p
	}
	close(ch)
	wg.Wait()
}

// BenchmarkAnalyzeTypicalEndToEnd measures what `dosecover analyze` does
// on the typical session folder: dicomio.Load with the thermometry frames
// left in the files (LoadOptions.Deferred, as the command loads), then
// Prepare (pixel data of the frames, thermometry and dose) and
// Session.Analyze with the default settings (50 Monte Carlo trials). Target: under 0.6 s per run on 2 cores. Reported beside wall
// time: CPU time per run (all goroutines), the wall and CPU time of each
// stage, files read per second and, for scale, the time of os.ReadFile of
// the same files on two goroutines ("readfile-ms").
func BenchmarkAnalyzeTypicalEndToEnd(b *testing.B) {
	dir, files := typicalFolder(b)
	ctx := context.Background()
	set := DefaultSettings()
	rf0 := time.Now()
	readAllFiles(files)
	readFile := time.Since(rf0)
	var load, prep, ana time.Duration    // wall
	var loadC, prepC, anaC time.Duration // CPU
	n := 0
	b.ResetTimer()
	c0 := testkit.CPUTime()
	for b.Loop() {
		t0, u0 := time.Now(), testkit.CPUTime()
		c, inv, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{Deferred: true}, nil)
		if err != nil {
			b.Fatal(err)
		}
		if !inv.Reviewable {
			b.Fatal(inv.NotReviewable)
		}
		t1, u1 := time.Now(), testkit.CPUTime()
		ses, err := Prepare(ctx, c, set, nil)
		if err != nil {
			b.Fatal(err)
		}
		t2, u2 := time.Now(), testkit.CPUTime()
		if _, err := ses.Analyze(ctx, set, nil); err != nil {
			b.Fatal(err)
		}
		t3, u3 := time.Now(), testkit.CPUTime()
		loadC += u1 - u0
		prepC += u2 - u1
		anaC += u3 - u2
		load += t1.Sub(t0)
		prep += t2.Sub(t1)
		ana += t3.Sub(t2)
		n++
	}
	reportCPU(b, c0, n)
	if n > 0 {
		ms := func(d time.Duration) float64 { return float64(d) / 1e6 / float64(n) }
		b.ReportMetric(ms(load), "load-ms")
		b.ReportMetric(ms(prep), "prepare-ms")
		b.ReportMetric(ms(ana), "analyze-ms")
		b.ReportMetric(ms(loadC), "load-cpu-ms")
		b.ReportMetric(ms(prepC), "prepare-cpu-ms")
		b.ReportMetric(ms(anaC), "analyze-cpu-ms")
		b.ReportMetric(float64(len(files))/(float64(load)/1e9/float64(n)), "files/s")
		b.ReportMetric(float64(readFile)/1e6, "readfile-ms")
	}
}

func TestMain(m *testing.M) {
	code := m.Run()
	if typicalDir != "" {
		os.RemoveAll(typicalDir)
	}
	os.Exit(code)
}

package review

import (
	"context"
	"io/fs"
	"os"
	"path/filepath"
	"testing"
	"time"

	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/dosemap/testkit"
)

// BenchmarkAnalyzeTwoPlanesEndToEnd times what `dosecover analyze` does on
// the simulated 35-sonication session measured on a coronal and a
// sagittal plane through each focus, both in one phase series and one
// magnitude series (sim.PlanesSession, 1701 files): reading with the frames
// left in their files, Prepare (thermometry and dose of 70 planes, the
// common analysis grid) and Analyze with the default settings. Beside wall
// time it reports CPU time (cpu-ms/op), per-stage times and the time of
// plain os.ReadFile of the same files (readfile-ms) to compare with on a
// noisy machine. The session is written into a temporary folder, or once
// into DOSECOVER_PLANES_DIR when that is set.
func BenchmarkAnalyzeTwoPlanesEndToEnd(b *testing.B) {
	if testing.Short() {
		b.Skip("writes a 35-sonication session")
	}
	dir, keep := os.LookupEnv("DOSECOVER_PLANES_DIR")
	if !keep {
		dir = b.TempDir()
	}
	if _, err := os.Stat(filepath.Join(dir, sim.TruthFile)); err != nil {
		if _, err := sim.WritePlanes(dir, sim.LayoutTwoPlanes, 1); err != nil {
			b.Fatal(err)
		}
	}
	var files []string
	if err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err == nil && d.Type().IsRegular() {
			files = append(files, p)
		}
		return err
	}); err != nil {
		b.Fatal(err)
	}
	rf0 := time.Now()
	readAllFiles(files)
	readFile := time.Since(rf0)
	ctx := context.Background()
	set := DefaultSettings()
	var load, prep, ana time.Duration
	n := 0
	b.ResetTimer()
	c0 := testkit.CPUTime()
	for b.Loop() {
		t0 := time.Now()
		c, inv, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{Deferred: true}, nil)
		if err != nil {
			b.Fatal(err)
		}
		if !inv.Reviewable || len(c.Sonications) != 35 {
			b.Fatalf("%d sonications, reviewable %v (%s)", len(c.Sonications), inv.Reviewable, inv.NotReviewable)
		}
		t1 := time.Now()
		ses, err := Prepare(ctx, c, set, nil)
		if err != nil {
			b.Fatal(err)
		}
		t2 := time.Now()
		if _, err := ses.Analyze(ctx, set, nil); err != nil {
			b.Fatal(err)
		}
		t3 := time.Now()
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
		b.ReportMetric(float64(readFile)/1e6, "readfile-ms")
	}
}

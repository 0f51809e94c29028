package follow

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/dosemap/testkit"
	"dosecover/review"
)

// BenchmarkFollowUpdate measures what follow does between the last file
// of a sonication and its update on the typical session (sim.TypicalSession:
// 24 sonications of 14 frames, 6 slices of 128×128, phase and magnitude):
// with 23 sonications prepared, read the 168 headers of the 24th, load its
// files, add it (its own thermometry and dose) and analyse the session
// again with the default settings (50 Monte Carlo trials). Each iteration
// adds the same files once more under a new number, so the session grows
// by one sonication per iteration (run with -benchtime 5x or so).
// The target: the update within 1 s of the sonication's last file, that is
// ms/update plus the settling time Options.Settle (200 ms) under 1000 ms.
// cpu-ms/update is the CPU time of the process per update (all threads:
// on a shared machine wall time measures the neighbours as well).
// DOSECOVER_TYPICAL_DIR names a folder holding the session written
// already (written there when missing).
func BenchmarkFollowUpdate(b *testing.B) {
	if testing.Short() {
		b.Skip("writing the typical session takes about 20 s; skipped with -short")
	}
	dir, keep := os.LookupEnv("DOSECOVER_TYPICAL_DIR")
	if !keep {
		dir = b.TempDir()
	}
	if _, err := os.Stat(filepath.Join(dir, "sonication-24")); err != nil {
		if _, err := sim.WriteTypical(dir, 1); err != nil {
			b.Fatal(err)
		}
	}
	var base, last []string
	err := filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() || !strings.HasSuffix(p, ".dcm") {
			return err
		}
		if strings.Contains(p, string(filepath.Separator)+"sonication-24"+string(filepath.Separator)) {
			last = append(last, p)
		} else {
			base = append(base, p)
		}
		return nil
	})
	if err != nil || len(last) == 0 {
		b.Fatalf("typical session in %s: %v (%d files of the last sonication)", dir, err, len(last))
	}
	ctx := context.Background()
	lopt := dicomio.LoadOptions{Deferred: true}
	c, _, err := dicomio.LoadFiles(ctx, dir, base, lopt, nil)
	if err != nil {
		b.Fatal(err)
	}
	set := review.DefaultSettings()
	ses, err := review.Prepare(ctx, c, set, nil)
	if err != nil {
		b.Fatal(err)
	}
	n := len(c.Sonications)
	b.ResetTimer()
	start, cpu0 := time.Now(), testkit.CPUTime()
	for i := 0; i < b.N; i++ {
		for _, p := range last {
			if _, err := dicomio.ReadHeader(p); err != nil {
				b.Fatal(err)
			}
		}
		c2, _, err := dicomio.LoadFiles(ctx, dir, last, lopt, nil)
		if err != nil || len(c2.Sonications) != 1 {
			b.Fatalf("loading the last sonication: %v", err)
		}
		so := c2.Sonications[0]
		n++
		so.Number = n
		if err := ses.AddSonication(ctx, so); err != nil {
			b.Fatal(err)
		}
		if _, err := ses.Analyze(ctx, set, nil); err != nil {
			b.Fatal(err)
		}
	}
	per := time.Since(start) / time.Duration(b.N)
	b.ReportMetric(float64((testkit.CPUTime()-cpu0).Milliseconds())/float64(b.N), "cpu-ms/update")
	b.ReportMetric(float64(per.Milliseconds()), "ms/update")
	b.ReportMetric(float64((per + 200*time.Millisecond).Milliseconds()), "ms-after-last-file")
}

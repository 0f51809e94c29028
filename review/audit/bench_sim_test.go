package audit

import (
	"encoding/json"
	"fmt"
	"path/filepath"
	"testing"

	"dosecover/dosemap/sim"
	"dosecover/review"
)

// BenchmarkAudit measures whole audits with the coverage analysis and the
// one-page reports (default settings, Monte Carlo included) on simulated
// sessions, with 1 and 2 workers: cases per minute (compare the two for
// the speed-up) and the peak heap per worker.
//
//   - varied: 4 cases of sim.WriteCases (17-18 sonications of 64×64
//     thermometry, about 1500 files each);
//   - typical: 2 copies of sim.TypicalSession (24 sonications × 14
//     frames, 6 slices of 128×128, about 4000 files each).
func BenchmarkAudit(b *testing.B) {
	set := review.DefaultSettings()
	js, _ := json.Marshal(set)
	a := NewAnalyzer(set, ReportArtifacts)
	for _, kind := range []string{"varied", "typical"} {
		in := filepath.Join(b.TempDir(), "registry")
		n := 4
		switch kind {
		case "varied":
			if _, err := sim.WriteCases(in, n, 11); err != nil {
				b.Fatal(err)
			}
		case "typical":
			n = 2
			if _, err := sim.WriteTypical(filepath.Join(in, "typical-1"), 1); err != nil {
				b.Fatal(err)
			}
			// Another seed: another study (copies of one study would be one
			// case, see Discover).
			if _, err := sim.WriteTypical(filepath.Join(in, "typical-2"), 2); err != nil {
				b.Fatal(err)
			}
		}
		for _, w := range []int{1, 2} {
			b.Run(fmt.Sprintf("%s/cases=%d/workers=%d", kind, n, w), func(b *testing.B) {
				benchAuditSettings(b, in, n, w, a, js)
			})
		}
	}
}

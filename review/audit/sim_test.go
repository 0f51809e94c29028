package audit

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"sync"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/sim"
	"dosecover/review"
)

// copyDir copies the regular files below src into dst.
func copyDir(t testing.TB, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, d os.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		q := filepath.Join(dst, rel)
		if err := os.MkdirAll(filepath.Dir(q), 0o755); err != nil {
			return err
		}
		return os.WriteFile(q, b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
}

// writeCasesParallel writes the same cases as sim.WriteCases(dir, n, seed)
// (sim.VariedSession k into dir/case-k) using every core.
func writeCasesParallel(dir string, n int, seed uint64) ([]*sim.Truth, error) {
	truths := make([]*sim.Truth, n)
	errs := make([]error, n)
	next := make(chan int)
	var wg sync.WaitGroup
	for range runtime.GOMAXPROCS(0) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := range next {
				s := sim.VariedSession(k+1, seed)
				sub := filepath.Join(dir, s.Label)
				if errs[k] = os.MkdirAll(sub, 0o755); errs[k] == nil {
					truths[k], errs[k] = sim.WriteSession(sub, s)
				}
			}
		}()
	}
	for k := range n {
		next <- k
	}
	close(next)
	wg.Wait()
	return truths, errors.Join(errs...)
}

// analysisOf reads the analysis part of a case record.
func analysisOf(t *testing.T, dir string) *review.Result {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, RecordFile))
	if err != nil {
		t.Fatal(err)
	}
	var rec struct {
		Analysis review.Result `json:"analysis"`
	}
	if err := json.Unmarshal(b, &rec); err != nil {
		t.Fatalf("%s: %v", dir, err)
	}
	return &rec.Analysis
}

// TestAuditSimulatedCases audits ten simulated sessions (dosemap/sim, whose
// truth.json records the bioheat ground truth), a copy of one with a
// thermometry file overwritten by garbage and a copy of another without its
// RTSTRUCT. The ten must be analysed and agree with their truth: the
// largest true hole is found where the truth puts it, and every spill
// sonication shows as lethal dose outside the margin attributed to it. The
// two damaged copies are reported as failed and incomplete.
func TestAuditSimulatedCases(t *testing.T) {
	if testing.Short() {
		t.Skip("simulates and audits ten sessions; skipped with -short")
	}
	tmp := t.TempDir()
	root := filepath.Join(tmp, "registry")
	truths, err := writeCasesParallel(root, 10, 7)
	if err != nil {
		t.Fatal(err)
	}
	// Damaged copies.
	corrupt := filepath.Join(root, "case-011")
	copyDir(t, filepath.Join(root, "case-001"), corrupt)
	garbage := filepath.Join(corrupt, "sonication-01", "IM00005.dcm")
	if _, err := os.Stat(garbage); err != nil {
		t.Fatalf("no thermometry file to damage: %v", err)
	}
	if err := os.WriteFile(garbage, []byte("\x00\x01 not a DICOM file any more \xfe\xff"), 0o644); err != nil {
		t.Fatal(err)
	}
	incomplete := filepath.Join(root, "case-012")
	copyDir(t, filepath.Join(root, "case-002"), incomplete)
	if err := os.RemoveAll(filepath.Join(incomplete, "structures")); err != nil {
		t.Fatal(err)
	}

	set := review.DefaultSettings()
	set.Trials = 0 // the truth check needs no Monte Carlo; keeps the test short
	js, _ := json.Marshal(set)
	out := filepath.Join(tmp, "audit")
	sum, err := Run(context.Background(), Config{
		Inputs: []string{root}, OutDir: out, Workers: 2,
		Analyzer: NewAnalyzer(set, ReportArtifacts), Settings: js, SettingsColumns: SettingsColumns(set),
	})
	if err != nil {
		t.Fatal(err)
	}
	rows := map[string]Row{}
	for _, r := range sum.Rows {
		rows[r.Case] = r
	}
	if len(rows) != 12 {
		t.Fatalf("%d rows, want 12", len(rows))
	}
	if r := rows["registry__case-011"]; r.Status != StatusFailed || !strings.Contains(r.Reason, "IM00005.dcm") {
		t.Errorf("corrupted case: %s %q", r.Status, r.Reason)
	}
	if r := rows["registry__case-012"]; r.Status != StatusIncomplete || !strings.Contains(r.Reason, "contour") {
		t.Errorf("case without RTSTRUCT: %s %q", r.Status, r.Reason)
	}
	if sum.ExitCode() != 1 {
		t.Errorf("exit code %d with a failed case", sum.ExitCode())
	}
	for _, tr := range truths {
		if r := rows["registry__"+tr.Label]; strings.Contains(r.Reason, "not available in this build") {
			t.Skipf("the analysis of this build cannot compute dose from thermometry: %s", r.Reason)
		}
	}
	for _, tr := range truths {
		r := rows["registry__"+tr.Label]
		if r.Status != StatusOK {
			t.Errorf("%s: %s %s", tr.Label, r.Status, r.Reason)
			continue
		}
		res := analysisOf(t, r.Dir)
		// Coverage: the truth comes from the bioheat temperature, the
		// analysis from noisy, coarser thermometry. 10 percentage points
		// allow for the partial-volume voxels along the target surface
		// (judgement, about one voxel layer of a 20 mm lesion).
		if d := math.Abs(res.CoveredFractionOfTarget - tr.CoveredFraction); d > 0.10 {
			t.Errorf("%s: coverage %.3f, truth %.3f", tr.Label, res.CoveredFractionOfTarget, tr.CoveredFraction)
		}
		// The largest true hole: an analysed hole must lie where it is,
		// within the radius of a sphere of its volume plus one thermometry
		// slice (3 mm).
		if len(tr.Holes) > 0 {
			big := tr.Holes[0]
			reach := math.Cbrt(3*big.VolumeMM3/(4*math.Pi)) + 3
			found := false
			for _, h := range res.Holes {
				c := dosemap.Vec3(h.CentroidMM)
				if c.Sub(big.Center).Norm() <= reach {
					found = true
				}
			}
			if !found {
				t.Errorf("%s: no hole within %.1f mm of the true hole at %v (%.0f mm³); holes %+v", tr.Label, reach, big.Center, big.VolumeMM3, res.Holes)
			}
		}
		// Spills: lethal dose outside the margin, from a spill sonication.
		if len(tr.Spill) > 0 {
			if res.OutsideMarginLethalML <= 0 || len(res.OutsideClusters) == 0 {
				t.Errorf("%s: spill sonication %v but no lethal dose outside the margin", tr.Label, tr.Spill)
			} else if !slices.Contains(tr.Spill, res.OutsideClusters[0].Sonication) {
				t.Errorf("%s: largest outside cluster from sonication %d, truth spills %v", tr.Label, res.OutsideClusters[0].Sonication, tr.Spill)
			}
		}
	}
	if len(readCSV(t, filepath.Join(out, "summary.csv"))) != 13 {
		t.Error("summary.csv does not hold 12 rows")
	}
	if tf := tempFiles(t, out); len(tf) != 0 {
		t.Errorf("temporary files left: %v", tf)
	}
	for _, f := range []string{"report.png", "report.pdf"} {
		if fi, err := os.Stat(filepath.Join(out, "cases", "registry__case-001", f)); err != nil || fi.Size() == 0 {
			t.Errorf("report file %s: %v", f, err)
		}
	}
}

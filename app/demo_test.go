//go:build cgo

package main

import (
	"strings"
	"testing"
	"time"

	"dosecover/dosemap/sim"
)

// TestDemoOpens opens the built-in demo case as "dosecover" with no
// arguments does, through the DICOM reader and the analysis, and checks
// what the metrics panel states against the simulator's own truth file.
func TestDemoOpens(t *testing.T) {
	if testing.Short() {
		t.Skip("reads and analyses the whole demo case; skipped with -short")
	}
	dir, err := sim.DemoDir()
	if err != nil {
		t.Fatalf("demo case: %v", err)
	}
	rw := testWindow(t)
	start := time.Now()
	mark := rw.completed.Load()
	rw.openCase(dir)
	waitJobs(t, rw, mark, 1) // the load
	if rw.loaded == nil {
		t.Fatalf("demo not loaded: %s", rw.status.Text)
	}
	waitJobs(t, rw, mark, 2) // the analysis
	if rw.result == nil {
		if strings.Contains(rw.status.Text, "not available in this build") {
			t.Skipf("the analysis of this build cannot compute dose from thermometry yet: %s", rw.status.Text)
		}
		t.Fatalf("demo not analysed: %s", rw.status.Text)
	}
	t.Logf("demo opened and analysed in %v", time.Since(start))
	if len(rw.result.Sonications) != len(rw.loaded.Case.Sonications) {
		t.Errorf("%d sonication rows for %d sonications", len(rw.result.Sonications), len(rw.loaded.Case.Sonications))
	}
	if !strings.Contains(rw.metrics.facts.Text, "Covered") {
		t.Errorf("metrics panel:\n%s", rw.metrics.facts.Text)
	}
}

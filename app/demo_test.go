//go:build cgo

package main

import (
	"fmt"
	"image"
	"math"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/sim"

	"fyne.io/fyne/v2/test"
)

var (
	demoOnce  sync.Once
	demoDir   string
	demoTruth *sim.Truth
	demoErr   error
)

// freshDemo writes the demo case with the current simulator into a
// temporary folder named like its folder in the user cache
// (demo-VERSION-rREVISION, see sim.DemoDir), once per test run (the cached
// copy "dosecover" opens could stem from an older build).
func freshDemo(t *testing.T) (string, *sim.Truth) {
	t.Helper()
	if testing.Short() {
		t.Skip("writes, reads and analyses the whole demo case; skipped with -short")
	}
	demoOnce.Do(func() {
		var parent string
		if parent, demoErr = os.MkdirTemp("", "dosecover-demo-"); demoErr == nil {
			demoDir = filepath.Join(parent, fmt.Sprintf("demo-%s-r%d", dosemap.Version, sim.Revision))
			demoTruth, demoErr = sim.WriteDemo(demoDir)
		}
	})
	if demoErr != nil {
		t.Fatalf("writing the demo case: %v", demoErr)
	}
	return demoDir, demoTruth
}

func TestMain(m *testing.M) {
	// Started under the name dosecover (tests that run the command as a
	// separate process, or through a batch scheduler, link it so), the
	// test binary is the command.
	if filepath.Base(os.Args[0]) == "dosecover" {
		os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
	}
	code := m.Run()
	if demoDir != "" {
		os.RemoveAll(filepath.Dir(demoDir))
	}
	if mergeRefRoot != "" {
		os.RemoveAll(mergeRefRoot)
	}
	os.Exit(code)
}

// openDemoCase opens the demo case in rw through the DICOM reader and the
// analysis, as "dosecover" with no arguments does.
func openDemoCase(t *testing.T, rw *reviewWindow) *sim.Truth {
	t.Helper()
	dir, truth := freshDemo(t)
	old := demoCaseDir
	t.Cleanup(func() { demoCaseDir = old })
	demoCaseDir = func() (string, error) { return dir, nil }
	mark := rw.completed.Load()
	rw.openDemo()
	waitJobs(t, rw, mark, 3) // the demo folder, the load, then the analysis
	if rw.result == nil {
		t.Fatalf("demo not analysed: %s", rw.status.Text)
	}
	return truth
}

func TestDemoOpens(t *testing.T) {
	rw := testWindow(t)
	truth := openDemoCase(t, rw)
	r := rw.result
	if len(r.SonRows) != len(truth.Sonications) {
		t.Errorf("%d sonication rows, the simulator delivered %d", len(r.SonRows), len(truth.Sonications))
	}
	// The panel states what the analysis measured.
	facts := rw.metrics.facts.Text
	for _, want := range []string{
		fmt.Sprintf("%.1f %%", 100*(*r.CoveredFraction)),
		fmt.Sprintf("%d (%.3f mL)", len(r.HoleRows), sumML(r.HoleRows)),
		"240 CEM43 min",
	} {
		if !strings.Contains(facts, want) {
			t.Errorf("metrics panel lacks %q:\n%s", want, facts)
		}
	}
	// Both coverages are stated, each said of its part of the target.
	for _, l := range strings.Split(facts, "\n") {
		switch {
		case strings.HasPrefix(l, "Covered"):
			if r.NotMonitoredFraction > 0 && !strings.Contains(l, "of the monitored target") {
				t.Errorf("%.1f %% of the target is not monitored, yet the covered line does not say of which part: %q", 100*r.NotMonitoredFraction, l)
			}
		case strings.Contains(l, "of the whole target"):
			if want := fmt.Sprintf("%.1f %%", 100*r.CoveredFractionOfTarget); !strings.Contains(l, want) {
				t.Errorf("whole-target line %q, want %s", l, want)
			}
		}
	}
	if !strings.Contains(facts, "of the whole target") {
		t.Errorf("metrics panel lacks the coverage of the whole target:\n%s", facts)
	}
	// Against the simulator's truth: the target volume within 10 %
	// (voxelisation of the contours on the analysis grid).
	if want := truth.TargetVolumeMM3 / 1000; math.Abs(r.TargetVolumeML-want) > 0.1*want {
		t.Errorf("target %.2f mL, truth %.2f mL", r.TargetVolumeML, want)
	}
	t.Logf("covered %.3f (truth from the bioheat temperature %.3f)", (*r.CoveredFraction), truth.CoveredFraction)
	if len(truth.Spill) > 0 && len(r.SpillRows) == 0 {
		t.Errorf("the simulator sent sonications %v beyond the margin; no lethal cluster outside it is listed", truth.Spill)
	}
	// Named as the demo, not by its cache folder (which the reader gives
	// as the label of any folder).
	if want := demoLabel + " — dosecover " + version; rw.win.Title() != want {
		t.Errorf("window title %q, want %q", rw.win.Title(), want)
	}
}

// TestViewerGoldenDemo compares the acquisition view of the demo case as
// opened (target framed, 360×300) with testdata/viewer_demo.png; run with
// -update after a deliberate change of the renderer or the demo.
func TestViewerGoldenDemo(t *testing.T) {
	rw := testWindow(t)
	openDemoCase(t, rw)
	img := rw.viewers[0].draw(360, 300).(*image.RGBA)
	compareGolden(t, img, filepath.Join("testdata", "viewer_demo.png"))
}

func TestCancelLoading(t *testing.T) {
	dir, _ := freshDemo(t)
	rw := testWindow(t)
	mark := rw.completed.Load()
	rw.openCase(dir)
	if !rw.cancelBtn.Visible() || !rw.progress.Visible() {
		t.Error("no progress bar or Cancel button while loading")
	}
	test.Tap(rw.cancelBtn)
	waitJobs(t, rw, mark, 1)
	if rw.loaded != nil {
		t.Fatal("the case was loaded although Cancel was pressed")
	}
	if !strings.Contains(rw.status.Text, "cancelled") {
		t.Errorf("status after Cancel: %q", rw.status.Text)
	}
	if rw.cancelBtn.Visible() {
		t.Error("Cancel button still shown after cancelling")
	}
}

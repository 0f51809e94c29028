//go:build cgo

package main

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/sim"
	"dosecover/review/report"

	"fyne.io/fyne/v2"
)

// withStandInDemo points the window's demo at a folder named like the one
// sim.DemoDir writes into the user cache ("demo-VERSION-rREVISION") and
// reads every folder as the synthetic case, named by its folder as the
// DICOM reader names a case (dosemap/dicomio: Case.Label is the folder's
// base name). It returns the demo folder.
func withStandInDemo(t *testing.T) string {
	t.Helper()
	cache := filepath.Join(t.TempDir(), fmt.Sprintf("demo-%s-r%d", dosemap.Version, sim.Revision))
	if err := os.MkdirAll(cache, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(cache, "IM0001"), []byte("stand-in"), 0o644); err != nil {
		t.Fatal(err)
	}
	oldDemo, oldRead := demoCaseDir, readCase
	t.Cleanup(func() { demoCaseDir, readCase = oldDemo, oldRead })
	demoCaseDir = func() (string, error) { return cache, nil }
	readCase = func(_ context.Context, dir string, _ loadOptions, _ func(done, total int)) (*loadedCase, error) {
		lc := syntheticCase()
		lc.Dir = dir
		lc.Case.Label = filepath.Base(filepath.Clean(dir))
		return lc, nil
	}
	return cache
}

// recentMenu returns the recent-cases menu as the File menu shows it.
func recentMenu(rw *reviewWindow) *fyne.Menu {
	m := fyne.NewMenu("")
	rw.fillRecentMenu(m)
	return m
}

// TestDemoNamedAsDemo opens the demo as the window does (File ▸ Open the
// demo case, or no folder given) and then the same folder as a case folder
// the user chose: the demo is named "Demo case (gel phantom)" in the
// window title, the header, the recent cases, the review record and the
// exported report, never by its cache folder; the chosen folder keeps its
// name.
func TestDemoNamedAsDemo(t *testing.T) {
	cache := withStandInDemo(t)
	folder := filepath.Base(cache)
	rw := testWindow(t)
	mark := rw.completed.Load()
	rw.openDemo()
	waitJobs(t, rw, mark, 3) // the demo folder, the load, the analysis
	if rw.result == nil {
		t.Fatalf("demo not analysed: %s", rw.status.Text)
	}
	if want := "Demo case (gel phantom) — dosecover " + version; rw.win.Title() != want {
		t.Errorf("window title %q, want %q", rw.win.Title(), want)
	}
	if rw.title.Text != "Demo case (gel phantom)" {
		t.Errorf("header %q", rw.title.Text)
	}
	if rec, err := loadRecord(rw.hash); err != nil || rec == nil || rec.CaseLabel != "Demo case (gel phantom)" {
		t.Errorf("review record %+v, %v: want the case label \"Demo case (gel phantom)\"", rec, err)
	}
	if r := rw.recentCases(); len(r) != 1 || r[0] != recentDemo {
		t.Errorf("recent cases %q, want the demo only", r)
	}
	m := recentMenu(rw)
	if len(m.Items) != 1 || m.Items[0].Label != "Demo case (gel phantom)" {
		t.Fatalf("recent-cases menu %v", m.Items)
	}

	// The exported report names the demo the same way, file names included.
	out := exportTo(t, rw)
	base := rw.reportBase()
	if base != "Demo_case_gel_phantom-dose-review" {
		t.Errorf("report file stem %q", base)
	}
	var metrics struct {
		Case string `json:"case"`
	}
	b, err := os.ReadFile(filepath.Join(out, filepath.Base(rw.lastExport)+".json"))
	if err == nil {
		err = json.Unmarshal(b, &metrics)
	}
	if err != nil || metrics.Case != "Demo case (gel phantom)" {
		t.Errorf("report metrics name the case %q (%v)", metrics.Case, err)
	}

	// Teaching mode keeps its neutral label, made from the case label and
	// the input hash as for any case.
	rw.teachCheck.SetChecked(true)
	if want := report.DeidentifiedLabel("Demo case (gel phantom)", rw.hash); rw.title.Text != want || !strings.HasPrefix(rw.win.Title(), want+" — ") {
		t.Errorf("teaching mode: header %q, title %q, want %q", rw.title.Text, rw.win.Title(), want)
	}
	rw.teachCheck.SetChecked(false)

	// The same folder chosen as a case folder keeps its folder name.
	mark = rw.completed.Load()
	rw.openCase(cache)
	waitJobs(t, rw, mark, 2)
	if want := folder + " — dosecover " + version; rw.win.Title() != want {
		t.Errorf("folder opened as a case: title %q, want %q", rw.win.Title(), want)
	}
	if r := rw.recentCases(); len(r) != 2 || r[0] != cache || r[1] != recentDemo {
		t.Errorf("recent cases %q, want the folder, then the demo", r)
	}
	m = recentMenu(rw)
	if len(m.Items) != 2 || m.Items[0].Label != cache || m.Items[1].Label != "Demo case (gel phantom)" {
		t.Fatalf("recent-cases menu %v", m.Items)
	}

	// The demo's entry in the recent cases opens the demo again.
	mark = rw.completed.Load()
	m.Items[1].Action()
	waitJobs(t, rw, mark, 3)
	if rw.title.Text != "Demo case (gel phantom)" || strings.Contains(rw.win.Title(), folder) {
		t.Errorf("demo reopened from the recent cases: header %q, title %q", rw.title.Text, rw.win.Title())
	}
	if r := rw.recentCases(); len(r) != 2 || r[0] != recentDemo || r[1] != cache {
		t.Errorf("recent cases %q, want the demo, then the folder", r)
	}
}

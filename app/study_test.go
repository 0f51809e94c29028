//go:build cgo

package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/testkit"
	"dosecover/review"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/widget"
)

// twoStudies writes the three-sonication cut of the demo (our writer)
// and a folder holding it twice, written by pydicom: unchanged and as a
// second study of another invented patient (PatientID SIM-OTHER).
func twoStudies(t *testing.T) (single, mixed string) {
	t.Helper()
	py := testkit.Python(t)
	single = demoCase(t)
	mixed = filepath.Join(t.TempDir(), "mixed")
	testkit.Rewrite(t, py, single, mixed, "a-", nil)
	testkit.Rewrite(t, py, single, mixed, "b-", &testkit.Identity{PatientID: "SIM-OTHER", PatientName: "PHANTOM^SIM-OTHER", StudyDate: "20260120"})
	return single, mixed
}

// TestAnalyzeTwoStudies: a folder holding two studies (written by
// pydicom) is refused by analyze and report with both studies named and
// the way to choose; --study analyses the one chosen, with the same
// figures as that study's folder alone.
func TestAnalyzeTwoStudies(t *testing.T) {
	single, mixed := twoStudies(t)
	var out, errb bytes.Buffer
	if code := run([]string{"analyze", "--trials", "0", mixed}, &out, &errb); code != 1 {
		t.Fatalf("two studies: exit %d, want 1\n%s", code, errb.String())
	}
	for _, want := range []string{"2 studies", "DEMO-001", "SIM-OTHER", "2026-01-15", "2026-01-20", "--study UID"} {
		if !strings.Contains(errb.String(), want) {
			t.Errorf("refusal %q does not name %q", errb.String(), want)
		}
	}
	png := filepath.Join(t.TempDir(), "r.png")
	errb.Reset()
	if code := run([]string{"report", mixed, "-o", png}, &out, &errb); code != 1 || !strings.Contains(errb.String(), "--study UID") {
		t.Errorf("report of two studies: exit %d: %s", code, errb.String())
	}
	// The demo's own study, from the inventory of the folder alone.
	var inv bytes.Buffer
	run([]string{"inspect", single}, &inv, &bytes.Buffer{})
	uid := ""
	for _, l := range strings.Split(inv.String(), "\n") {
		if f := strings.Fields(l); len(f) == 2 && f[0] == "uid" && uid == "" {
			uid = f[1]
		}
	}
	if uid == "" {
		t.Fatalf("no study uid in the inventory:\n%s", inv.String())
	}
	var alone, chosen bytes.Buffer
	errb.Reset()
	if code := run([]string{"analyze", "--trials", "0", single}, &alone, &errb); code != 0 {
		t.Fatalf("study alone: exit %d: %s", code, errb.String())
	}
	errb.Reset()
	if code := run([]string{"analyze", "--trials", "0", "--study", uid, mixed}, &chosen, &errb); code != 0 {
		t.Fatalf("--study: exit %d: %s", code, errb.String())
	}
	if !strings.Contains(errb.String(), "not to the chosen study") || !strings.Contains(errb.String(), "SIM-OTHER") {
		t.Errorf("files of the other study not listed as not used: %s", errb.String())
	}
	// Same figures: every line from the coverage on (the case label differs).
	fig := func(s string) string {
		if i := strings.Index(s, "Covered"); i >= 0 {
			return s[i:]
		}
		return s
	}
	if fig(alone.String()) != fig(chosen.String()) {
		t.Errorf("the chosen study gives other figures than its folder alone:\n%s\n---\n%s", alone.String(), chosen.String())
	}
	// The result names the study analysed (its StudyInstanceUID as the
	// inventory lists it, DICOM PS3.3 C.7.2.1).
	var js bytes.Buffer
	errb.Reset()
	if code := run([]string{"analyze", "--trials", "0", "--study", uid, "--json", "-", mixed}, &js, &errb); code != 0 {
		t.Fatalf("--study --json: exit %d: %s", code, errb.String())
	}
	var res struct {
		Study *string `json:"study_uid"`
	}
	if err := json.Unmarshal(js.Bytes(), &res); err != nil || res.Study == nil || *res.Study != uid {
		t.Errorf("result JSON study_uid %v (%v), want %s", res.Study, err, uid)
	}
}

// TestWindowStudyChooser opens a folder of two studies in the window:
// nothing is read, a chooser lists both studies (patient and date), and
// the study chosen is opened alone.
func TestWindowStudyChooser(t *testing.T) {
	_, mixed := twoStudies(t)
	rw := testWindow(t)
	mark := rw.completed.Load()
	rw.openFolder(mixed, false)
	waitJobs(t, rw, mark, 1)
	if rw.loaded != nil {
		t.Fatalf("a folder of two studies was opened as one case")
	}
	var pick *widget.RadioGroup
	var open *widget.Button
	var walk func(o fyne.CanvasObject)
	walk = func(o fyne.CanvasObject) {
		switch w := o.(type) {
		case *widget.RadioGroup:
			pick = w
		case *widget.Button:
			if w.Text == "Open" {
				open = w
			}
		case *fyne.Container:
			for _, ch := range w.Objects {
				walk(ch)
			}
		}
		if w, ok := o.(fyne.Widget); ok {
			for _, ch := range test.WidgetRenderer(w).Objects() {
				walk(ch)
			}
		}
	}
	for _, o := range rw.win.Canvas().Overlays().List() {
		walk(o)
	}
	if pick == nil || open == nil || len(pick.Options) != 2 {
		t.Fatalf("no study chooser shown")
	}
	if d := os.Getenv("DOSECOVER_SHOTS"); d != "" {
		writePNG(t, filepath.Join(d, "study-chooser.png"), rw.win.Canvas().Capture())
	}
	choice := ""
	for _, o := range pick.Options {
		if strings.Contains(o, "DEMO-001") && strings.Contains(o, "2026-01-15") {
			choice = o
		}
	}
	if choice == "" || !strings.Contains(strings.Join(pick.Options, "\n"), "SIM-OTHER") {
		t.Fatalf("chooser options %q do not name both patients", pick.Options)
	}
	pick.SetSelected(choice)
	mark = rw.completed.Load()
	test.Tap(open)
	waitJobs(t, rw, mark, 1)
	if rw.loaded == nil || rw.loaded.Case.Patient.ID != "DEMO-001" || rw.loaded.Study == "" || !strings.Contains(choice, rw.loaded.Study) {
		t.Fatalf("the chosen study was not opened: %+v", rw.loaded)
	}
}

// TestReportSignOffStale: a sign-off recorded for the analysis of a case
// with the default settings is printed by "dosecover report" with those
// settings (its comment too) and not with another margin, which is named.
func TestReportSignOffStale(t *testing.T) {
	dir := demoCase(t)
	store := t.TempDir()
	old := reviewsDir
	reviewsDir = func() (string, error) { return store, nil }
	t.Cleanup(func() { reviewsDir = old })
	set := review.DefaultSettings()
	set.Trials = 0
	c, inv, err := dicomio.Load(t.Context(), dir, dicomio.LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	r, err := review.Analyze(t.Context(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	hash, n, err := hashInputs(t.Context(), dir)
	if err != nil {
		t.Fatal(err)
	}
	so, err := review.NewSignOff("A. Reviewer", review.OutcomeAccepted, "holes at the edge reviewed", hash, inv.Study, r, time.Date(2026, 5, 4, 13, 30, 0, 0, time.UTC))
	if err != nil {
		t.Fatal(err)
	}
	rec := &reviewRecord{InputHash: hash, Files: n, Settings: review.DefaultSettings(), SignOffs: []review.SignOff{so}}
	if err := rec.save(); err != nil {
		t.Fatal(err)
	}
	metrics := func(args ...string) map[string]any {
		js := filepath.Join(t.TempDir(), "m.json")
		var out, errb bytes.Buffer
		if code := run(append([]string{"report", dir, "--trials", "0", "--json", js}, args...), &out, &errb); code != 0 {
			t.Fatalf("report %v: exit %d: %s", args, code, errb.String())
		}
		b, err := os.ReadFile(js)
		if err != nil {
			t.Fatal(err)
		}
		var m map[string]any
		if err := json.Unmarshal(b, &m); err != nil {
			t.Fatal(err)
		}
		return m
	}
	m := metrics()
	if so, _ := m["sign_off"].(string); !strings.HasPrefix(so, "signed off by A. Reviewer on 2026-05-04 13:30 UTC: coverage accepted") {
		t.Errorf("same settings: sign-off %q", so)
	}
	if c, _ := m["sign_off_comment"].(string); c != "holes at the edge reviewed" {
		t.Errorf("same settings: comment %q", c)
	}
	m = metrics("--margin", "5")
	so2, _ := m["sign_off"].(string)
	if !strings.HasPrefix(so2, "not signed off for these settings (last sign-off by A. Reviewer on 2026-05-04 13:30 UTC") || !strings.Contains(so2, "margin (mm): 3 then, 5 now") {
		t.Errorf("another margin: sign-off %q", so2)
	}
	if _, ok := m["sign_off_comment"]; ok {
		t.Errorf("another margin: the comment of a sign-off that does not apply is printed")
	}
}

//go:build cgo

package main

import (
	"encoding/json"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/review"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/storage"
	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/widget"
)

func TestOpenShowsMetrics(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	r := rw.result
	// Sonications 1 and 2 (peak 3000 CEM43, sigma 5 mm) cover the 10 mm
	// sphere: the weakest target point, (0, ±10, 0), receives
	// 2·3000·exp(-(25+100)/50) = 492 CEM43 ≥ 240 (computed).
	if (*r.CoveredFraction) < 0.999 {
		t.Errorf("covered fraction %.4f, want 1 (every target point gets ≥ 492 CEM43)", (*r.CoveredFraction))
	}
	// Target volume: a 10 mm sphere, 4/3·π·1000 mm³ = 4.19 mL; the slab
	// model of 2 mm slices approximates it within 5 % (tolerance for the
	// slice discretisation).
	if want := 4.0 / 3 * math.Pi * 1000 / 1000; math.Abs(r.TargetVolumeML-want) > 0.05*want {
		t.Errorf("target volume %.3f mL, want %.3f ± 5 %%", r.TargetVolumeML, want)
	}
	facts := rw.metrics.facts.Text
	for _, want := range []string{"PTV phantom", "Covered", "100.0 %", "Holes", "Lethal outside margin", "240 CEM43 min", "3 mm"} {
		if !strings.Contains(facts, want) {
			t.Errorf("metrics panel lacks %q:\n%s", want, facts)
		}
	}
	if len(r.SpillRows) == 0 {
		t.Error("sonication 3, 16 mm posterior, left no lethal cluster outside the margin")
	}
	if rows, _ := rw.sonTable.Length(); rows != 3 {
		t.Errorf("sonication table has %d rows, want 3", rows)
	}
	if !strings.Contains(rw.win.Title(), "Synthetic phantom") {
		t.Errorf("title %q lacks the case label", rw.win.Title())
	}
	if !strings.Contains(rw.identity.Text, "PHANTOM^TEST") {
		t.Errorf("identity line %q lacks the patient name", rw.identity.Text)
	}
	// Hovering the target centre reads the dose there: 2·3000·exp(-25/50)
	// = 3639 CEM43 (computed), within 10 % for trilinear sampling of a
	// 2 mm grid.
	s := rw.describePoint(dosemap.Vec3{0, 0, 0})
	if !strings.Contains(s, "dose") || !strings.Contains(s, "anatomy") {
		t.Errorf("hover text %q lacks anatomy or dose", s)
	}
	if d := float64(rw.scene.Dose.Sample(dosemap.Vec3{0, 0, 0})); math.Abs(d-3639) > 364 {
		t.Errorf("dose at the centre %.0f, want 3639 ± 10 %%", d)
	}
}

// checksOf returns the check boxes drawn in the table, top to bottom.
func checksOf(tb *widget.Table) []*widget.Check {
	var out []*widget.Check
	var walk func(o fyne.CanvasObject)
	walk = func(o fyne.CanvasObject) {
		if !o.Visible() {
			return
		}
		if c, ok := o.(*widget.Check); ok {
			out = append(out, c)
			return
		}
		switch w := o.(type) {
		case *fyne.Container:
			for _, ch := range w.Objects {
				walk(ch)
			}
		case fyne.Widget:
			r := test.WidgetRenderer(w)
			r.Refresh() // the table creates its visible cells on refresh
			for _, ch := range r.Objects() {
				walk(ch)
			}
		}
	}
	walk(tb)
	sort.SliceStable(out, func(i, j int) bool {
		return fyne.CurrentApp().Driver().AbsolutePositionForObject(out[i]).Y < fyne.CurrentApp().Driver().AbsolutePositionForObject(out[j]).Y
	})
	return out
}

func TestUntickSonicationChangesCoverage(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	before := rw.result
	var addedBy1 float64
	for _, s := range before.SonRows {
		if s.Number == 1 {
			addedBy1 = s.CoverageAdded
		}
	}
	checks := checksOf(rw.sonTable)
	if len(checks) != 3 {
		t.Fatalf("found %d check boxes in the sonication table, want 3", len(checks))
	}
	mark := rw.completed.Load()
	test.Tap(checks[1]) // untick sonication 2
	waitJobs(t, rw, mark, 1)
	after := rw.result
	if got := rw.settings.Excluded; len(got) != 1 || got[0] != 2 {
		t.Fatalf("excluded sonications %v, want [2]", got)
	}
	if !((*after.CoveredFraction) < (*before.CoveredFraction)-0.1) {
		t.Errorf("coverage %.3f -> %.3f: leaving out sonication 2 should uncover the right half", (*before.CoveredFraction), (*after.CoveredFraction))
	}
	// Coverage is credited in delivery order, so the coverage without
	// sonication 2 (sonication 3 adds none) equals what sonication 1 added
	// in the full analysis; 1 % for the analysis grid.
	if math.Abs((*after.CoveredFraction)-addedBy1) > 0.01 {
		t.Errorf("coverage without sonication 2 is %.3f, sonication 1 alone was credited %.3f", (*after.CoveredFraction), addedBy1)
	}
	if len(after.HoleRows) == 0 {
		t.Error("no hole reported after leaving out sonication 2")
	}
	if !strings.Contains(rw.metrics.facts.Text, "Sonications left out") {
		t.Errorf("metrics do not state the exclusion:\n%s", rw.metrics.facts.Text)
	}
	// Ticking it again restores the full coverage.
	mark = rw.completed.Load()
	test.Tap(checksOf(rw.sonTable)[1])
	waitJobs(t, rw, mark, 1)
	if math.Abs((*rw.result.CoveredFraction)-(*before.CoveredFraction)) > 1e-9 {
		t.Errorf("coverage after re-ticking %.4f, want %.4f", (*rw.result.CoveredFraction), (*before.CoveredFraction))
	}
}

func TestClickHoleJumpsToSlice(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	mark := rw.completed.Load()
	rw.setExcluded(2, true)
	waitJobs(t, rw, mark, 1)
	if len(rw.result.HoleRows) == 0 {
		t.Fatal("no hole to click")
	}
	h := rw.result.HoleRows[0]
	v := rw.viewers[0]
	v.setSlice(0)
	test.Tap(rw.metrics.holes.Objects[0].(*widget.Button))
	// The acquisition plane is the anatomy stack: slices 2 mm apart from
	// z = -14 mm.
	want := int(math.Round((h.Centre[2] + 14) / 2))
	if v.slice != want {
		t.Errorf("viewer shows slice %d after clicking the hole at z = %.1f mm, want %d", v.slice, h.Centre[2], want)
	}
	// The hole is centred: the view transform maps the display centre onto
	// its in-plane position.
	tr, ok := v.transform(400, 400)
	if !ok {
		t.Fatal("no view transform")
	}
	c := tr.At(200, 200)
	if math.Abs(c[0]-h.Centre[0]) > 1e-6 || math.Abs(c[1]-h.Centre[1]) > 1e-6 {
		t.Errorf("display centre at (%.2f, %.2f) mm, hole at (%.2f, %.2f)", c[0], c[1], h.Centre[0], h.Centre[1])
	}
	if int(rw.sliders[0].Value) != want {
		t.Errorf("slider at %v, want %d", rw.sliders[0].Value, want)
	}
}

func TestSliceKeysWheelAndSlider(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	v := rw.viewers[0]
	k := v.slice
	v.TypedKey(&fyne.KeyEvent{Name: fyne.KeyUp})
	if v.slice != k+1 {
		t.Errorf("arrow up: slice %d, want %d", v.slice, k+1)
	}
	v.Scrolled(&fyne.ScrollEvent{Scrolled: fyne.NewDelta(0, -10)})
	if v.slice != k {
		t.Errorf("wheel: slice %d, want %d", v.slice, k)
	}
	rw.sliders[0].SetValue(2)
	if v.slice != 2 {
		t.Errorf("slider: slice %d, want 2", v.slice)
	}
	v.TypedKey(&fyne.KeyEvent{Name: fyne.KeyEnd})
	if v.slice != 14 {
		t.Errorf("End: slice %d, want 14", v.slice)
	}
	v.TypedKey(&fyne.KeyEvent{Name: fyne.KeyPageUp})
	if v.slice != 14 {
		t.Errorf("Page Up past the end: slice %d, want 14", v.slice)
	}
}

func TestTeachingModeHidesIdentity(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	rw.teachCheck.SetChecked(true)
	for _, s := range []string{rw.win.Title(), rw.title.Text, rw.identity.Text, rw.loadInfo.Text} {
		for _, secret := range []string{"PHANTOM", "T-0001", "Synthetic phantom", rw.loaded.Dir} {
			if strings.Contains(s, secret) {
				t.Errorf("teaching mode shows %q in %q", secret, s)
			}
		}
	}
	if msg := rw.scrub("reading " + filepath.Join(rw.loaded.Dir, "x.dcm") + ": truncated"); strings.Contains(msg, rw.loaded.Dir) {
		t.Errorf("teaching mode error message shows the folder: %q", msg)
	}
	for n, d := range rw.recentCases() {
		if strings.Contains(rw.recentLabel(n, d), d) {
			t.Errorf("teaching mode lists the recent folder %q", d)
		}
	}
	rw.teachCheck.SetChecked(false)
	if !strings.Contains(rw.identity.Text, "PHANTOM") {
		t.Errorf("identity not shown again after teaching mode: %q", rw.identity.Text)
	}
}

func TestSignOffRecorded(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	if err := rw.addSignOff("A. Reviewer", review.OutcomeAccepted, "reviewed in rounds", testTime); err != nil {
		t.Fatal(err)
	}
	rec, err := loadRecord(rw.hash)
	if err != nil || rec == nil {
		t.Fatalf("record not found: %v", err)
	}
	if len(rec.SignOffs) != 1 {
		t.Fatalf("%d sign-offs, want 1", len(rec.SignOffs))
	}
	s := rec.SignOffs[0]
	raw, _ := rw.resultRaw()
	if s.Reviewer != "A. Reviewer" || s.InputHash != rw.hash || !s.Time.Equal(testTime) || !reflect.DeepEqual(s.Figures, review.HeadlineOf(raw)) || s.Outcome != review.OutcomeAccepted {
		t.Errorf("sign-off %+v does not match the review", s)
	}
	var set map[string]any
	if err := json.Unmarshal(s.Settings, &set); err != nil || set["threshold"] != 240.0 || set["thermometry"] == nil {
		t.Errorf("sign-off does not hold the complete settings (%v): %s", err, s.Settings)
	}
	if !strings.HasPrefix(rw.signState.Text, "Signed off: coverage accepted") {
		t.Errorf("header: %q", rw.signState.Text)
	}
}

// TestSignOffStaleOnExport signs off, leaves a sonication out and exports:
// the report must not show the sign-off, must say it is not signed off for
// these settings and name what differs; the header says so too. Taking the
// sonication back restores the sign-off, its comment printed.
func TestSignOffStaleOnExport(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	if err := rw.addSignOff("A. Reviewer", review.OutcomeFollowUp, "spill beyond the margin to discuss", testTime); err != nil {
		t.Fatal(err)
	}
	metricsOf := func() map[string]any {
		out := exportTo(t, rw)
		b, err := os.ReadFile(filepath.Join(out, filepath.Base(rw.lastExport)+".json"))
		if err != nil {
			t.Fatal(err)
		}
		var m map[string]any
		if err := json.Unmarshal(b, &m); err != nil {
			t.Fatal(err)
		}
		return m
	}
	m := metricsOf()
	if so, _ := m["sign_off"].(string); !strings.HasPrefix(so, "signed off by A. Reviewer") || !strings.Contains(so, review.OutcomeFollowUp) {
		t.Errorf("signed analysis exported with sign-off %q", so)
	}
	if c, _ := m["sign_off_comment"].(string); c != "spill beyond the margin to discuss" {
		t.Errorf("comment %q not on the report", c)
	}
	mark := rw.completed.Load()
	rw.setExcluded(2, true)
	waitJobs(t, rw, mark, 1)
	m = metricsOf()
	so, _ := m["sign_off"].(string)
	for _, want := range []string{"not signed off for these settings", "last sign-off by A. Reviewer", "sonications left out: none then, 2 now"} {
		if !strings.Contains(so, want) {
			t.Errorf("stale sign-off exported as %q; want it to say %q", so, want)
		}
	}
	if _, ok := m["sign_off_comment"]; ok {
		t.Errorf("the comment of a sign-off that does not apply is on the report")
	}
	if m["reviewer"] != nil && m["reviewer"] != "" {
		t.Errorf("reviewer %v printed for an analysis nobody signed off", m["reviewer"])
	}
	if rw.signState.Text != "Not signed off for these settings" {
		t.Errorf("header: %q", rw.signState.Text)
	}
	mark = rw.completed.Load()
	rw.setExcluded(2, false)
	waitJobs(t, rw, mark, 1)
	if !strings.HasPrefix(rw.signState.Text, "Signed off: needs follow-up") {
		t.Errorf("header after restoring the settings: %q", rw.signState.Text)
	}
}

// TestViewerGolden compares the viewer's picture of the synthetic case
// (middle acquisition slice, 320×320) with testdata/viewer_synthetic.png;
// run with -update to rewrite it after a deliberate change.
func TestViewerGolden(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	img := rw.viewers[0].draw(320, 320).(*image.RGBA)
	compareGolden(t, img, filepath.Join("testdata", "viewer_synthetic.png"))
}

// compareGolden compares img with the PNG at path, or rewrites it with
// -update. It allows a difference of 3 levels per channel (floating-point
// rounding across machines) on at most 0.5 % of the pixels.
func compareGolden(t *testing.T, img *image.RGBA, path string) {
	t.Helper()
	if *update {
		writePNG(t, path, img)
		return
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatalf("golden image missing (run go test -run %s -update): %v", t.Name(), err)
	}
	defer f.Close()
	want, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	if want.Bounds() != img.Bounds() {
		t.Fatalf("size %v, golden %v", img.Bounds(), want.Bounds())
	}
	b := img.Bounds()
	bad := 0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r1, g1, b1, _ := img.At(x, y).RGBA()
			r2, g2, b2, _ := want.At(x, y).RGBA()
			if absDiff(r1, r2) > 3*257 || absDiff(g1, g2) > 3*257 || absDiff(b1, b2) > 3*257 {
				bad++
			}
		}
	}
	if bad > b.Dx()*b.Dy()/200 {
		got := filepath.Join(t.TempDir(), "got.png")
		writePNG(t, got, img)
		t.Errorf("%d pixels differ from %s", bad, path)
	}
}

func absDiff(a, b uint32) uint32 {
	if a > b {
		return a - b
	}
	return b - a
}

// exportTo writes the report into a new folder and returns it.
func exportTo(t *testing.T, rw *reviewWindow) string {
	t.Helper()
	out := t.TempDir()
	mark := rw.exported.Load()
	rw.writeReport(out)
	deadline := time.Now().Add(60 * time.Second)
	for rw.exported.Load() == mark {
		if time.Now().After(deadline) {
			t.Fatal("report export did not finish")
		}
		time.Sleep(10 * time.Millisecond)
	}
	return out
}

func TestExportReportTeachingMode(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	if err := rw.addSignOff("A. Reviewer", review.OutcomeAccepted, "", testTime); err != nil {
		t.Fatal(err)
	}
	// Without teaching mode the metrics name the case.
	plain := exportTo(t, rw)
	js, err := os.ReadFile(rw.lastExport + ".json")
	if filepath.Dir(rw.lastExport) != plain {
		t.Errorf("exported to %s, want into %s", rw.lastExport, plain)
	}
	if err != nil || !strings.Contains(string(js), "Synthetic phantom") {
		t.Fatalf("identified export lacks the case label (%v)", err)
	}
	rw.teachCheck.SetChecked(true)
	out := exportTo(t, rw)
	ents, err := os.ReadDir(out)
	if err != nil {
		t.Fatal(err)
	}
	if len(ents) != 4 {
		t.Fatalf("wrote %d files, want PNG, PDF, JSON and CSV: %v (status %s)", len(ents), ents, rw.status.Text)
	}
	for _, e := range ents {
		if strings.Contains(e.Name(), "Synthetic") {
			t.Errorf("teaching-mode file name %q carries the case label", e.Name())
		}
		b, err := os.ReadFile(filepath.Join(out, e.Name()))
		if err != nil {
			t.Fatal(err)
		}
		if strings.HasSuffix(e.Name(), ".json") || strings.HasSuffix(e.Name(), ".csv") {
			for _, secret := range []string{"PHANTOM^TEST", "T-0001", "Synthetic phantom"} {
				if strings.Contains(string(b), secret) {
					t.Errorf("%s contains %q in teaching mode", e.Name(), secret)
				}
			}
		}
	}
}

func TestDropFolderOpensIt(t *testing.T) {
	rw := testWindow(t)
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "readme.txt"), []byte("not an image"), 0o644); err != nil {
		t.Fatal(err)
	}
	mark := rw.completed.Load()
	// Dropping a file opens the folder that holds it.
	rw.dropped(fyne.NewPos(10, 10), []fyne.URI{storage.NewFileURI(filepath.Join(dir, "readme.txt"))})
	waitJobs(t, rw, mark, 1)
	// The folder holds no DICOM file: the reader's message names the
	// folder, and nothing was written into it.
	if !strings.Contains(rw.status.Text, "cannot be reviewed") || !strings.Contains(rw.status.Text, filepath.Base(dir)) {
		t.Errorf("status after dropping a folder without a case: %q", rw.status.Text)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 1 {
		t.Errorf("the dropped folder now holds %d entries", len(ents))
	}
}

func TestRecentCases(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	first := rw.loaded.Dir
	if r := rw.recentCases(); len(r) == 0 || r[0] != first {
		t.Fatalf("recent cases %v, want %s first", r, first)
	}
	openSynthetic(t, rw)
	r := rw.recentCases()
	if len(r) != 2 || r[1] != first {
		t.Errorf("recent cases %v: want the new case first, then %s", r, first)
	}
}

func TestSelectSonicationShowsItsDose(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	rw.sonTable.Select(widget.TableCellID{Row: 2, Col: 1})
	if rw.scene.Dose != rw.result.SonicationDose[2] || rw.scene.Dose == nil {
		t.Fatal("selecting row 3 did not show sonication 3's dose")
	}
	// Sonication 3 alone at the grid node (1, 15, 1.5) mm next to its
	// blob centre (0, 16, 0), sigma 2.5 mm: 3000·exp(−(1+1+2.25)/12.5) =
	// 2135 CEM43 (computed); 1 % for float32 storage.
	if d := float64(rw.scene.Dose.Sample(dosemap.Vec3{1, 15, 1.5})); math.Abs(d-2135.3) > 21 {
		t.Errorf("dose of sonication 3 at (1, 15, 1.5) mm is %.1f, want 2135.3", d)
	}
	if !strings.Contains(rw.selInfo.Text, "sonication 3") {
		t.Errorf("selection label %q", rw.selInfo.Text)
	}
	rw.selectSonication(-1)
	if rw.scene.Dose != rw.result.Dose {
		t.Error("Cumulative did not return to the cumulative dose")
	}
}

func TestDrawDriftReference(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	// The thermometry grid of the fixture has voxel centres at x, y = -29,
	// -27, ... mm and 10 slices: a rectangle from (-30, -30) to (-20.5,
	// -20.5) mm holds x, y in {-29, ..., -21}, 5 × 5 × 10 = 250 voxels.
	r := review.NewRect(dosemap.Vec3{-20.5, -20.5, 0}, dosemap.Vec3{-30, -30, 0}, dosemap.Vec3{1, 0, 0}, dosemap.Vec3{0, 1, 0})
	if r.W != 9.5 || r.H != 9.5 || r.Origin != (dosemap.Vec3{-30, -30, 0}) {
		t.Fatalf("rectangle %+v", r)
	}
	g := rw.loaded.Case.Sonications[0].Geometry
	if _, n := r.Mask(g); n != 250 {
		t.Errorf("reference holds %d voxels, want 250", n)
	}
	far := rw.settings.Thermometry
	far.DriftReference = review.NewRect(dosemap.Vec3{100, 100, 0}, dosemap.Vec3{110, 110, 0}, r.U, r.V)
	if _, err := far.Options(g); err == nil {
		t.Error("a rectangle outside the thermometry was accepted")
	}
	// Drawing on the left image: a drag in reference mode sets the
	// reference and re-analyses.
	// The drag runs from (-28, -28) to (-22, -22) mm, inside the
	// thermometry, wherever the layout puts the view.
	v := rw.viewers[0]
	w, h := int(v.Size().Width), int(v.Size().Height)
	v.draw(w, h)
	tr, ok := v.transform(w, h)
	if !ok {
		t.Fatal("the left view shows nothing")
	}
	px := func(x, y float64) fyne.Position {
		a, b := tr.Pixel(dosemap.Vec3{x, y, 0})
		return fyne.NewPos(float32(a), float32(b))
	}
	from, to := px(-28, -28), px(-22, -22)
	rw.startRefMode()
	mark := rw.completed.Load()
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: from.AddXY(2, 2)}, Dragged: fyne.NewDelta(2, 2)})
	v.Dragged(&fyne.DragEvent{PointEvent: fyne.PointEvent{Position: to}, Dragged: fyne.NewDelta(to.X-from.X-2, to.Y-from.Y-2)})
	v.DragEnd()
	waitJobs(t, rw, mark, 1)
	if rw.settings.Thermometry.DriftReference == nil || v.refMode {
		t.Fatalf("no drift reference after drawing (mode still %v); status %q", v.refMode, rw.status.Text)
	}
	if !strings.Contains(rw.metrics.used.Text, "reference region drawn") {
		t.Errorf("settings text does not say the reference was drawn: %q", rw.metrics.used.Text)
	}
	mark = rw.completed.Load()
	rw.automaticRef()
	waitJobs(t, rw, mark, 1)
	if rw.settings.Thermometry.DriftReference != nil || !strings.Contains(rw.metrics.used.Text, "automatic reference") {
		t.Errorf("automatic reference not restored: %q", rw.metrics.used.Text)
	}
}

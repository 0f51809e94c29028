//go:build cgo

package main

import (
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"sort"
	"strconv"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/review"
	"dosecover/review/view"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"
)

// TestSonicationTableAfterReanalysis follows the steps after which the
// sonication table once came up empty: drawing a drift reference,
// exporting the report, switching teaching mode on and off, then a
// re-analysis (a sonication left out and taken back). After each step the
// table must list every sonication, drawn with its check box.
func TestSonicationTableAfterReanalysis(t *testing.T) {
	for _, demo := range []bool{false, true} {
		rw := testWindow(t)
		if demo {
			openDemoCase(t, rw)
		} else {
			openSynthetic(t, rw)
		}
		sonicationTableSteps(t, rw)
	}
}

func sonicationTableSteps(t *testing.T, rw *reviewWindow) {
	want := len(rw.result.SonRows)
	check := func(step string) {
		t.Helper()
		rows, _ := rw.sonTable.Length()
		if rows != want || want == 0 {
			t.Fatalf("after %s: the table has %d rows, want %d", step, rows, want)
		}
		// What is drawn, read without refreshing anything: the first
		// and, scrolled down, the last row are on screen, above the
		// horizontal scroll bar.
		rw.sonTable.ScrollToTop()
		if got := shownSonications(t, rw); !slices.Contains(got, rw.result.SonRows[rw.sonIndex(0)].Number) {
			t.Fatalf("after %s, scrolled to the top: rows of sonications %v on screen, want the first row's", step, got)
		}
		rw.sonTable.ScrollToBottom()
		if got := shownSonications(t, rw); !slices.Contains(got, rw.result.SonRows[rw.sonIndex(want-1)].Number) {
			t.Fatalf("after %s, scrolled to the bottom: rows of sonications %v on screen, want the last row's", step, got)
		}
		if n := len(checksOf(rw.sonTable)); n == 0 {
			t.Fatalf("after %s: no row drawn", step)
		}
	}
	check("opening")
	mark := rw.completed.Load()
	g := rw.loaded.Case.Sonications[0].Geometry
	a, b := g.Point(1, 1, 0), g.Point(9, 9, 0)
	rw.refDrawn(a, b, dosemap.Vec3{1, 0, 0}, dosemap.Vec3{0, 1, 0})
	waitJobs(t, rw, mark, 1)
	check("drawing a drift reference")
	exportTo(t, rw)
	check("exporting")
	rw.teachCheck.SetChecked(true)
	check("teaching mode on")
	mark = rw.completed.Load()
	rw.setExcluded(2, true)
	waitJobs(t, rw, mark, 1)
	check("leaving sonication 2 out")
	rw.teachCheck.SetChecked(false)
	mark = rw.completed.Load()
	rw.setExcluded(2, false)
	waitJobs(t, rw, mark, 1)
	check("taking sonication 2 back")
}

// shownSonications returns the numbers (column "no.") of the sonication
// rows drawn whole inside the table's scroll area and above its horizontal
// scroll bar, as the table's renderers hold them (nothing is refreshed).
// widget.Table keeps its cells in a scroll area: a cell is seen only where
// it lies inside both the area's viewport and the area's content.
func shownSonications(t *testing.T, rw *reviewWindow) []int {
	t.Helper()
	objs := test.WidgetRenderer(rw.sonTable).Objects()
	scroll := objs[len(objs)-1]
	sv := reflect.ValueOf(scroll).Elem()
	content, ok := sv.FieldByName("Content").Interface().(fyne.Widget)
	if !ok {
		t.Fatal("the table's scroll area has no content")
	}
	off := sv.FieldByName("Offset").Interface().(fyne.Position)
	// The viewport in content coordinates, less the scroll bar.
	top, bottom := off.Y, off.Y+scroll.Size().Height-theme.ScrollBarSize()
	// Each cell: a box holding the check box and the label; the "no."
	// column is the leftmost whose label shows.
	colX := float32(-1)
	var cells []*fyne.Container
	for _, o := range test.WidgetRenderer(content).Objects() {
		c, ok := o.(*fyne.Container)
		if !ok || !c.Visible() || len(c.Objects) != 1 {
			continue
		}
		if l := c.Objects[0].(*fyne.Container).Objects[1].(*tipLabel); l.Visible() {
			if colX < 0 || c.Position().X < colX {
				colX = c.Position().X
			}
			cells = append(cells, c)
		}
	}
	var out []int
	for _, c := range cells {
		l := c.Objects[0].(*fyne.Container).Objects[1].(*tipLabel)
		y0, y1 := c.Position().Y, c.Position().Y+l.Size().Height
		if c.Position().X != colX || y0 < top || y1 > bottom || y1 > content.Size().Height {
			continue
		}
		if n, err := strconv.Atoi(l.Text); err == nil {
			out = append(out, n)
		}
	}
	sort.Ints(out)
	return out
}

// TestExportNamesNeverOverwrite: an export is named by the case and the
// date, and a second export into the same folder on the same day gets a
// new name instead of replacing the first.
func TestExportNamesNeverOverwrite(t *testing.T) {
	dir := t.TempDir()
	day := time.Date(2026, 12, 3, 10, 0, 0, 0, time.Local)
	first := exportStem(dir, "Case_A-dose-review", day)
	if want := filepath.Join(dir, "Case_A-dose-review-2026-12-03"); first != want {
		t.Fatalf("stem %q, want %q", first, want)
	}
	if err := os.WriteFile(first+".pdf", []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	second := exportStem(dir, "Case_A-dose-review", day)
	if second != first+"-2" {
		t.Errorf("second export %q, want %q", second, first+"-2")
	}
	// The window's export: twice into one folder, eight files.
	rw := testWindow(t)
	openSynthetic(t, rw)
	out := exportTo(t, rw)
	mark := rw.exported.Load()
	rw.writeReport(out)
	for rw.exported.Load() == mark {
		time.Sleep(10 * time.Millisecond)
	}
	ents, _ := os.ReadDir(out)
	if len(ents) != 8 {
		t.Errorf("two exports left %d files, want 8: %v", len(ents), ents)
	}
	for _, e := range ents {
		if !strings.HasPrefix(e.Name(), "Synthetic_phantom-dose-review-"+time.Now().Format("2006-01-02")) {
			t.Errorf("export file %q lacks the case and the date", e.Name())
		}
	}
}

// TestSmallRegionsSummarised: holes below the display size are listed as
// one line, the larger ones one by one; the analysis keeps them all.
func TestSmallRegionsSummarised(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	rs := []region{{Label: "H1", VolumeML: 0.25, Detail: "depth 2.0 mm"}, {Label: "H2", VolumeML: 0.0004}, {Label: "H3", VolumeML: 0.0009}}
	rows := rw.metrics.regionRows(rs, "hole")
	if len(rows) != 3 {
		t.Fatalf("%d rows, want the large hole (title and details) and one summary line", len(rows))
	}
	if b, ok := rows[0].(*widget.Button); !ok || !strings.HasPrefix(b.Text, "H1   0.250 mL") {
		t.Errorf("first row %#v", rows[0])
	}
	// 0.4 + 0.9 mm³ = 0.0013 mL (computed).
	if l, ok := rows[2].(*widget.Label); !ok || l.Text != "and 2 holes below 1 mm³ (0.001 mL together)" {
		t.Errorf("summary row %#v", rows[2])
	}
	rw.app.Preferences().SetFloat(prefListMin, 0.5)
	if rows := rw.metrics.regionRows(rs, "hole"); len(rows) != 5 {
		t.Errorf("with 0.5 mm³ %d rows, want two holes listed and one summarised", len(rows))
	}
	if rows := rw.metrics.regionRows(nil, "hole"); len(rows) != 1 || rows[0].(*widget.Label).Text != "None." {
		t.Errorf("no hole: %v", rows)
	}
}

// TestDriftFlagInTable: a sonication whose removed drift exceeds the
// limit gets a flag (not only a note) in the table.
func TestDriftFlagInTable(t *testing.T) {
	q := review.SonicationQuality{MaxDriftC: 1.4}
	f, flagged := qualityFlags(q, 0, 0)
	if !flagged || len(f) == 0 || !strings.Contains(f[0], "drift 1.40 °C removed, above 1 °C") {
		t.Errorf("1.4 °C drift, default limit: flags %q, flagged %v", f, flagged)
	}
	if f, flagged := qualityFlags(q, 0, 2); flagged || !strings.Contains(strings.Join(f, ";"), "drift ≤ 1.40 °C") {
		t.Errorf("1.4 °C drift, 2 °C limit: flags %q, flagged %v; want a note only", f, flagged)
	}
}

// TestSortSonications: tapping a column header sorts the table by it,
// tapping again reverses; selecting a row shows the sonication listed
// there; the lethal volume each added outside the margin is a column.
func TestSortSonications(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	rows := rw.result.SonRows
	doseOf := func(n int) float64 { return rows[rw.sonIndex(n)].PeakDose }
	rw.sortSonications(5) // peak dose
	for n := 1; n < len(rows); n++ {
		if doseOf(n-1) > doseOf(n) {
			t.Fatalf("ascending by peak dose: row %d %g before row %d %g", n-1, doseOf(n-1), n, doseOf(n))
		}
	}
	rw.sortSonications(5)
	for n := 1; n < len(rows); n++ {
		if doseOf(n-1) < doseOf(n) {
			t.Fatalf("descending by peak dose: row %d %g before row %d %g", n-1, doseOf(n-1), n, doseOf(n))
		}
	}
	rw.sonTable.Select(widget.TableCellID{Row: 0, Col: 1})
	if rw.selected != rw.sonIndex(0) {
		t.Errorf("selected result row %d, want %d (the first row as sorted)", rw.selected, rw.sonIndex(0))
	}
	// Sonication 3 lands 16 mm behind the target, beyond the 3 mm margin:
	// all lethal dose outside the margin is its own.
	if got, want := rows[2].OutsideML, rw.result.OutsideMarginLethalML; got <= 0 || got > want+1e-9 {
		t.Errorf("sonication 3 added %g mL outside the margin, the case %g mL", got, want)
	}
	rw.sortSonications(1)
	rw.sortSonications(1)
	if rw.sonIndex(0) != len(rows)-1 {
		t.Errorf("descending by number: first row is result row %d", rw.sonIndex(0))
	}
}

// TestSettingsOrigin: the settings dialog says whether its values are the
// case's (from its review record) or your defaults, and in which settings
// your defaults differ.
func TestSettingsOrigin(t *testing.T) {
	rw := testWindow(t)
	if s := rw.settingsOrigin(); !strings.Contains(s, "No case is open") {
		t.Errorf("no case: %q", s)
	}
	openSynthetic(t, rw)
	s := rw.settingsOrigin()
	if !strings.Contains(s, "no review record yet") || !strings.Contains(s, "are the same") {
		t.Errorf("fresh case, default settings: %q", s)
	}
	d := rw.settings
	d.MarginMM = 5
	savePrefSettings(rw.app.Preferences(), d)
	rw.fromRecord = true
	s = rw.settingsOrigin()
	// Only the setting that differs is named, with both values.
	if !strings.Contains(s, "from its review record") || !strings.Contains(s, "differ in: margin (mm): 3 here, 5 in your defaults.") {
		t.Errorf("case from its record, other defaults: %q", s)
	}
}

// TestPinnedPointPlots: pinning a point plots its temperature with the
// sonication numbers along the time axis and, below it, the dose
// accumulated there over time (the dose curve in the target colour).
func TestPinnedPointPlots(t *testing.T) {
	rw := testWindow(t)
	// The synthetic case holds ready dose maps only (no temperature to
	// plot, and the probe says so); the demo has thermometry.
	rw.pin(dosemap.Vec3{0, 0, 0})
	openDemoCase(t, rw)
	if len(rw.result.HoleRows) == 0 {
		t.Fatal("no hole in the demo to pin")
	}
	rw.pin(rw.result.HoleRows[0].Centre)
	deadline := time.Now().Add(30 * time.Second)
	for rw.probeCurve == nil && time.Now().Before(deadline) {
		time.Sleep(5 * time.Millisecond)
	}
	c := rw.probeCurve
	if c == nil || rw.probe.below == nil {
		t.Fatalf("no probe plots (message %q)", rw.probeMsg.Text)
	}
	if len(c.Numbers) != len(rw.result.SonRows) || c.Numbers[0] != rw.result.SonRows[0].Number {
		t.Errorf("sonication numbers %v, want one per sonication", c.Numbers)
	}
	img := renderPlotsImage(probePlot(c), probeDosePlot(c), 600, 400, 1)
	lower := 0
	for y := 260; y < 400; y++ {
		for x := 0; x < 600; x++ {
			if img.RGBAAt(x, y) == view.ColorTarget {
				lower++
			}
		}
	}
	if lower < 50 {
		t.Errorf("%d pixels of the dose curve in the lower plot, want a curve", lower)
	}
}

// TestSonicationLabelOnHover: a label cut short in the table shows its
// full text while the pointer rests on it, below the label and inside the
// window; a label that fits shows none, and leaving hides the tip.
func TestSonicationLabelOnHover(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	long := "Sonication 1, posterior edge of the target near the capsule, second pass at reduced power"
	rw.result.SonRows[0].Label = long
	rw.refreshSonTable()
	var cut, short *tipLabel
	var walk func(o fyne.CanvasObject)
	walk = func(o fyne.CanvasObject) {
		switch w := o.(type) {
		case *tipLabel:
			if w.Visible() && w.Text == long {
				cut = w
			}
			if w.Visible() && w.Text == "2" {
				short = w
			}
		case *fyne.Container:
			for _, ch := range w.Objects {
				walk(ch)
			}
		case fyne.Widget:
			for _, ch := range test.WidgetRenderer(w).Objects() {
				walk(ch)
			}
		}
	}
	walk(rw.sonTable)
	if cut == nil || short == nil {
		t.Fatal("the table does not show the long label and the number 2")
	}
	if !cut.cut() || short.cut() {
		t.Fatalf("cut: long label %v, number %v; want true, false", cut.cut(), short.cut())
	}
	d := fyne.CurrentApp().Driver()
	c := rw.win.Canvas()
	centre := func(o fyne.CanvasObject) fyne.Position {
		return d.AbsolutePositionForObject(o).Add(fyne.NewPos(o.Size().Width/2, o.Size().Height/2))
	}
	test.MoveMouse(c, centre(cut))
	if got := rw.tips.shown(); got != long {
		t.Fatalf("hovering the cut label shows %q, want the full label", got)
	}
	box := rw.tips.box
	at, lab := d.AbsolutePositionForObject(box), d.AbsolutePositionForObject(cut)
	win := c.Size()
	if at.X < 0 || at.Y < 0 || at.X+box.Size().Width > win.Width || at.Y+box.Size().Height > win.Height {
		t.Errorf("tip at %v size %v leaves the %v window", at, box.Size(), win)
	}
	if at.Y != lab.Y+cut.Size().Height && at.Y+box.Size().Height != lab.Y {
		t.Errorf("tip at y %g, label %g–%g: want just below or just above it", at.Y, lab.Y, lab.Y+cut.Size().Height)
	}
	if box.Size().Width < fyne.MeasureText(long, theme.TextSize(), fyne.TextStyle{}).Width {
		if rw.tips.text.MinSize().Height < 2*cut.MinSize().Height-2*theme.InnerPadding() {
			t.Errorf("tip %v narrower than the text and not wrapped", box.Size())
		}
	}
	test.MoveMouse(c, centre(short))
	if got := rw.tips.shown(); got != "" {
		t.Errorf("hovering a label that fits shows %q, want no tip", got)
	}
	test.MoveMouse(c, centre(cut))
	test.MoveMouse(c, fyne.NewPos(5, 5))
	if got := rw.tips.shown(); got != "" {
		t.Errorf("after the pointer left, the tip %q stays", got)
	}
}

// TestPinnedPlotTaller: while the pinned point's tab is open its plots
// (temperature above, dose below) get about half the column, at least
// 1.4 times the height the tab had before; the other tabs give the room
// back to the images.
func TestPinnedPlotTaller(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	tabs := rw.bottomTabs
	// One round first: the rows of the display controls settle at the
	// first layout of the column.
	tabs.SelectIndex(1)
	tabs.SelectIndex(0)
	before := tabs.Size().Height
	views := rw.viewers[0].Size().Height
	tabs.SelectIndex(1)
	plot := rw.probe.raster.Size().Height
	if tabs.Size().Height < 1.4*before || plot < 300 {
		t.Errorf("pinned point tab %g px high (was %g), plot %g px; want ≥ 1.4× and a plot ≥ 300 px", tabs.Size().Height, before, plot)
	}
	tabs.SelectIndex(0)
	if got := rw.viewers[0].Size().Height; got != views {
		t.Errorf("back on the sonications the left view is %g px high, was %g", got, views)
	}
}

// TestSettingsDialogColumns: the settings dialog shows every field of
// every section in one column, labels in one before it, and each number
// with its unit; it says whose values it shows; the threshold's unit
// follows the dose model.
func TestSettingsDialogColumns(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	rw.openSettings()
	top := rw.win.Canvas().Overlays().Top()
	if top == nil {
		t.Fatal("no settings dialog")
	}
	var grids []*fyne.Container
	var texts []string
	var model *widget.Select
	var walk func(o fyne.CanvasObject)
	walk = func(o fyne.CanvasObject) {
		switch w := o.(type) {
		case *fyne.Container:
			if _, ok := w.Layout.(settingsColumns); ok && w.Visible() {
				grids = append(grids, w)
			}
			for _, ch := range w.Objects {
				walk(ch)
			}
		case *widget.Label:
			texts = append(texts, w.Text)
		case *widget.Select:
			if len(w.Options) == 2 && strings.HasPrefix(w.Options[1], "Arrhenius") {
				model = w
			}
		case fyne.Widget:
			for _, ch := range test.WidgetRenderer(w).Objects() {
				walk(ch)
			}
		}
	}
	walk(top)
	if len(grids) < 3 {
		t.Fatalf("%d sections in columns, want dose, model parameters and thermometry", len(grids))
	}
	if !strings.Contains(strings.Join(texts, "\n"), "These settings apply to this case") {
		t.Error("the dialog does not say whose settings it shows")
	}
	d := fyne.CurrentApp().Driver()
	fieldX, labelX, entries := float32(-1), float32(-1), 0
	unitOf := map[string]string{}
	for _, g := range grids {
		for i := 0; i+2 < len(g.Objects); i += 3 {
			label, field, unit := g.Objects[i].(*widget.Label), g.Objects[i+1], g.Objects[i+2].(*widget.Label)
			fx, lx := d.AbsolutePositionForObject(field).X, d.AbsolutePositionForObject(label).X
			if fieldX < 0 {
				fieldX, labelX = fx, lx
			}
			if fx != fieldX || lx != labelX {
				t.Errorf("%q: label at x %g, field at x %g; the first row has %g, %g", label.Text, lx, fx, labelX, fieldX)
			}
			if _, ok := field.(*dialogEntry); ok {
				entries++
				if unit.Text == "" {
					t.Errorf("%q has no unit", label.Text)
				}
			}
			unitOf[label.Text] = unit.Text
		}
	}
	if entries < 12 {
		t.Errorf("%d number fields found, want at least 12", entries)
	}
	if unitOf["Safety margin"] != "mm" || unitOf["Lethal threshold"] != "CEM43 min" {
		t.Errorf("units %v", unitOf)
	}
	model.SetSelectedIndex(1)
	unitOf = map[string]string{}
	for _, g := range grids {
		for i := 0; i+2 < len(g.Objects); i += 3 {
			unitOf[g.Objects[i].(*widget.Label).Text] = g.Objects[i+2].(*widget.Label).Text
		}
	}
	if u := unitOf["Lethal threshold"]; !strings.HasPrefix(u, "Ω") {
		t.Errorf("with the Arrhenius model the threshold's unit is %q, want Ω", u)
	}
}

// TestLongCaseLabelHeader: a long case label is cut with an ellipsis
// beside the identity line instead of being drawn over it, and shows in
// full on hover.
func TestLongCaseLabelHeader(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	rw.loaded.Case.Label = "Fictitious liver phantom, second session, posterior segment after repositioning of the transducer"
	rw.updateTitle()
	rw.win.Content().Refresh()
	for _, width := range []float32{1280, 1600, 1920} {
		rw.win.Resize(fyne.NewSize(width, 940))
		d := fyne.CurrentApp().Driver()
		tx, ix := d.AbsolutePositionForObject(rw.title).X, d.AbsolutePositionForObject(rw.identity).X
		if tx+rw.title.Size().Width > ix+0.5 {
			t.Errorf("%g px: title ends at x %g, identity starts at %g", width, tx+rw.title.Size().Width, ix)
		}
		if !rw.title.cut() || rw.title.Size().Width < 100 {
			t.Errorf("%g px: title %g px wide, cut %v; want cut and readable", width, rw.title.Size().Width, rw.title.cut())
		}
		if e, sx := ix+rw.identity.Size().Width, d.AbsolutePositionForObject(rw.signState).X; e > sx+0.5 {
			t.Errorf("%g px: identity ends at %g over the sign-off state", width, e)
		}
		c := rw.win.Canvas()
		test.MoveMouse(c, d.AbsolutePositionForObject(rw.title).AddXY(20, 10))
		if got := rw.tips.shown(); got != rw.loaded.Case.Label {
			t.Errorf("%g px: hovering the title shows %q", width, got)
		}
		test.MoveMouse(c, fyne.NewPos(width/2, 500))
	}
}

// TestWindowFitsNarrowScreens: the window's content needs no more than
// 1280 px of width, so nothing is cut at the right edge of a 1280, 1600
// or 1920 px wide window.
func TestWindowFitsNarrowScreens(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	for _, width := range []float32{1280, 1600, 1920} {
		rw.win.Resize(fyne.NewSize(width, 940))
		if m := rw.win.Content().MinSize(); m.Width > 1280-2*theme.Padding() {
			t.Errorf("at %g px the content needs %g px", width, m.Width)
		}
		if got := rw.win.Canvas().Size().Width; got != width {
			t.Errorf("window asked %g px wide is %g", width, got)
		}
	}
}

// TestSonicationTableNextCase: a case with fewer sonications opened after
// one scrolled to its end shows all its rows from the top.
func TestSonicationTableNextCase(t *testing.T) {
	rw := testWindow(t)
	openDemoCase(t, rw)
	rw.sonTable.ScrollToBottom()
	if got := shownSonications(t, rw); len(got) == 0 || got[len(got)-1] != len(rw.result.SonRows) {
		t.Fatalf("demo scrolled to the bottom shows sonications %v", got)
	}
	openSynthetic(t, rw)
	if got := shownSonications(t, rw); !slices.Equal(got, []int{1, 2, 3}) {
		t.Errorf("the next case shows sonications %v, want 1, 2, 3", got)
	}
}

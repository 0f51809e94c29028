//go:build cgo

package main

import (
	"strings"
	"testing"

	"dosecover/review"
	"dosecover/review/audit"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/widget"
)

// headerButton returns the drawn header of table whose text is title (a
// sort mark after it allowed); nil when none is drawn.
func headerButton(table *widget.Table, title string) *tipButton {
	for _, b := range objectsOf[*tipButton](table) {
		if b.Text == title || strings.HasPrefix(b.Text, title+" ") {
			return b
		}
	}
	return nil
}

// titleUnit is the unit a short column title ends with ("peak °C": "°C"),
// "" for a title without one.
func titleUnit(title string) string {
	f := strings.Fields(title)
	switch u := f[len(f)-1]; u {
	case "°C", "mL", "s", "%":
		return u
	}
	return ""
}

// hoverHeaders moves the pointer onto the header of every column of table
// in turn (scrolled into view) and returns what the tip layer shows for
// each, and checks that leaving a header hides its tip.
func hoverHeaders(t *testing.T, c fyne.Canvas, table *widget.Table, tips *tipLayer, titles []string) []string {
	t.Helper()
	d := fyne.CurrentApp().Driver()
	var shown []string
	for col, title := range titles {
		table.ScrollTo(widget.TableCellID{Row: 0, Col: col})
		b := headerButton(table, title)
		if b == nil {
			t.Fatalf("column %q: no header drawn", title)
		}
		at := d.AbsolutePositionForObject(b).Add(fyne.NewPos(b.Size().Width/2, b.Size().Height/2))
		test.MoveMouse(c, at)
		shown = append(shown, tips.shown())
		box := tips.box
		if p, win := d.AbsolutePositionForObject(box), c.Size(); shown[col] != "" &&
			(p.X < 0 || p.Y < 0 || p.X+box.Size().Width > win.Width+0.5 || p.Y+box.Size().Height > win.Height+0.5) {
			t.Errorf("column %q: tip at %v size %v leaves the %v window", title, p, box.Size(), win)
		}
		test.MoveMouse(c, fyne.NewPos(2, c.Size().Height-2))
		if got := tips.shown(); got != "" {
			t.Errorf("column %q: after the pointer left the header, the tip %q stays", title, got)
		}
	}
	return shown
}

// checkHeaderTip checks one column's tip: a full name with the unit the
// short title gives, a colon, then a meaning.
func checkHeaderTip(t *testing.T, title, tip string) {
	t.Helper()
	name, meaning, ok := strings.Cut(tip, ": ")
	if !ok || len(meaning) < 20 || len(name) < len(strings.TrimSuffix(title, " "+titleUnit(title)))-1 {
		t.Errorf("column %q: tip %q, want the full name, a colon and a one-line meaning", title, tip)
	}
	if u := titleUnit(title); u != "" && !strings.Contains(name, ", "+u) {
		t.Errorf("column %q: tip %q does not give the unit %s after the name", title, tip, u)
	}
	if strings.Contains(tip, "{") {
		t.Errorf("column %q: tip %q holds a placeholder", title, tip)
	}
}

// TestSonicationHeaderTips: resting the pointer on any header of the
// sonication table shows the column's full name, unit and meaning; the
// peak dose gives the dose model's unit of the analysis on screen.
func TestSonicationHeaderTips(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	var titles []string
	for _, c := range sonColumns {
		titles = append(titles, c.title)
	}
	shown := hoverHeaders(t, rw.win.Canvas(), rw.sonTable, rw.tips, titles)
	for col, tip := range shown {
		if want := rw.sonColumnTip(col); tip != want || tip == "" {
			t.Errorf("column %q: hovering shows %q, want %q", titles[col], tip, want)
		}
		checkHeaderTip(t, titles[col], tip)
	}
	if tip := shown[5]; !strings.HasPrefix(tip, "Peak dose, "+rw.result.Unit+":") || rw.result.Unit != "CEM43 min" {
		t.Errorf("peak dose tip %q, want the unit %q of the analysis", tip, rw.result.Unit)
	}
	if tip := shown[7]; !strings.HasPrefix(tip, "Added coverage, % of the monitored target:") {
		t.Errorf("coverage added tip %q", tip)
	}
	// The headers still sort: a tap on "peak dose" orders by it.
	rw.sonTable.ScrollTo(widget.TableCellID{Row: 0, Col: 5})
	test.Tap(headerButton(rw.sonTable, "peak dose"))
	if rw.sonSort != 5 {
		t.Errorf("tapping the peak dose header sorts by column %d", rw.sonSort)
	}
}

// TestAuditHeaderTips: resting the pointer on any header of the audit
// table shows the column's full name, unit and meaning.
func TestAuditHeaderTips(t *testing.T) {
	a := test.NewTempApp(t)
	av, _ := testAuditView(t, a, func() (review.Settings, string, string) { return review.DefaultSettings(), "defaults", "" })
	av.setRows([]audit.Row{{Case: "a", Source: "registry/a", Status: audit.StatusOK,
		Metrics: audit.Metrics{CoveragePct: 91.5, CoverageP05Pct: 90, CoverageP95Pct: 93}}}, t.TempDir())
	var titles []string
	for _, c := range auditColumns {
		titles = append(titles, c.title)
	}
	shown := hoverHeaders(t, av.win.Canvas(), av.table, av.tips, titles)
	for col, tip := range shown {
		if tip != auditColumns[col].tip || tip == "" {
			t.Errorf("column %q: hovering shows %q, want %q", titles[col], tip, auditColumns[col].tip)
		}
		checkHeaderTip(t, titles[col], tip)
	}
}

// TestAuditCaseNameOnHover: two case names cut alike in the audit table
// ("registry/fictitious-liver-phan…") each show in full while the pointer
// rests on them; a name that fits shows none.
func TestAuditCaseNameOnHover(t *testing.T) {
	a := test.NewTempApp(t)
	av, _ := testAuditView(t, a, func() (review.Settings, string, string) { return review.DefaultSettings(), "defaults", "" })
	names := []string{"registry/fictitious-liver-phantom-two-plane-series", "registry/fictitious-liver-phantom-two-planes", "registry/a"}
	var rows []audit.Row
	for n, s := range names {
		rows = append(rows, audit.Row{Case: string(rune('a' + n)), Source: s, Status: audit.StatusOK, Metrics: audit.Metrics{CoveragePct: 90}})
	}
	av.setRows(rows, t.TempDir())
	av.table.ScrollToLeading()
	c := av.win.Canvas()
	d := fyne.CurrentApp().Driver()
	found := 0
	for _, cell := range objectsOf[*auditCell](av.table) {
		if cell.id.Col != 0 {
			continue
		}
		found++
		name := cell.text.Text
		test.MoveMouse(c, d.AbsolutePositionForObject(cell.text).AddXY(cell.text.Size().Width/2, cell.text.Size().Height/2))
		want := ""
		if len(name) > len("registry/a") {
			want = name
			if !cell.text.cut() {
				t.Errorf("%q is not cut in a %g px column; the test needs a longer name", name, cell.text.Size().Width)
			}
		}
		if got := av.tips.shown(); got != want {
			t.Errorf("hovering the case %q shows %q, want %q", name, got, want)
		}
		test.MoveMouse(c, fyne.NewPos(2, 2))
	}
	if found != len(names) {
		t.Errorf("%d case cells drawn, want %d", found, len(names))
	}
}

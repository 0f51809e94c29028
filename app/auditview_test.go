//go:build cgo

package main

import (
	"context"
	"errors"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/sim"
	"dosecover/review"
	"dosecover/review/audit"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/widget"
)

// standInStarted receives the case ID when the stand-in analysis starts a
// case marked SLOW.
var standInStarted = make(chan string, 16)

// withStandInAnalysis replaces the audit's analysis by one driven by
// marker files in each case folder: FAIL fails the case, INCOMPLETE marks
// it incomplete, SLOW waits until the audit is cancelled; otherwise the
// case gets 10 % of coverage per file and one hole.
func withStandInAnalysis(t *testing.T) {
	old := newAuditAnalyzer
	t.Cleanup(func() { newAuditAnalyzer = old })
	newAuditAnalyzer = func(review.Settings) audit.Analyzer {
		return func(ctx context.Context, c *audit.Case) (*audit.CaseResult, error) {
			for _, f := range c.Files {
				switch f {
				case "FAIL":
					return nil, errors.New("marker file FAIL in " + c.Dir)
				case "INCOMPLETE":
					return nil, audit.Incomplete("no thermometry (marker file)")
				case "SLOW":
					standInStarted <- c.ID
					<-ctx.Done()
					return nil, ctx.Err()
				}
			}
			m := audit.NoMetrics()
			m.CoveragePct = audit.Num(10 * len(c.Files))
			m.Holes = 1
			m.LargestHoleML = 0.25
			return &audit.CaseResult{Metrics: m, Flags: []string{"stand-in"}}, nil
		}
	}
}

// uiQueue collects the audit window's updates from background goroutines;
// waitAudit runs them on the test goroutine, as the desktop driver runs
// them on its main goroutine (the test driver would run them at once on the
// calling goroutine, racing with the test's own taps).
type uiQueue struct {
	mu  sync.Mutex
	fns []func()
}

func (q *uiQueue) push(f func()) {
	q.mu.Lock()
	q.fns = append(q.fns, f)
	q.mu.Unlock()
}

// run runs the queued updates; it reports whether there were any.
func (q *uiQueue) run() bool {
	q.mu.Lock()
	fns := q.fns
	q.fns = nil
	q.mu.Unlock()
	for _, f := range fns {
		f()
	}
	return len(fns) > 0
}

var testUI = &uiQueue{}

// testAuditView opens an audit window whose "Open case" records the
// folders it is asked to open.
func testAuditView(t *testing.T, a fyne.App, current func() (review.Settings, string, string)) (*auditView, *[]string) {
	t.Helper()
	old := uiDo
	uiDo = testUI.push
	t.Cleanup(func() { testUI.run(); uiDo = old })
	var opened []string
	av := newAuditView(a, func(dir string) { opened = append(opened, dir) }, current)
	av.win.Show()
	av.win.Resize(fyne.NewSize(2100, 860)) // every column in view
	t.Cleanup(func() { av.stop(); av.win.Close() })
	return av, &opened
}

// waitAudit waits until n runs or loads have finished since mark.
func waitAudit(t *testing.T, av *auditView, mark, n int64) {
	t.Helper()
	deadline := time.Now().Add(120 * time.Second)
	for testUI.run() || av.finished.Load() < mark+n {
		if time.Now().After(deadline) {
			t.Fatalf("the audit did not finish (%s)", av.counts.Text)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// runAuditView sets the form and runs the audit to its end.
func runAuditView(t *testing.T, av *auditView, out string, inputs ...string) {
	t.Helper()
	for _, in := range inputs {
		av.addInput(in)
	}
	av.outEntry.SetText(out)
	mark := av.finished.Load()
	test.Tap(av.runBtn)
	waitAudit(t, av, mark, 1)
}

// objectsOf returns the visible objects below o that match, drawing the
// table's cells as the renderer does.
func objectsOf[T fyne.CanvasObject](o fyne.CanvasObject) []T {
	var out []T
	var walk func(o fyne.CanvasObject)
	walk = func(o fyne.CanvasObject) {
		if !o.Visible() {
			return
		}
		if c, ok := o.(T); ok {
			out = append(out, c)
		}
		switch w := o.(type) {
		case *fyne.Container:
			for _, ch := range w.Objects {
				walk(ch)
			}
		case fyne.Widget:
			r := test.WidgetRenderer(w)
			r.Refresh()
			for _, ch := range r.Objects() {
				walk(ch)
			}
		}
	}
	walk(o)
	return out
}

// cellTexts returns the text drawn in each visible cell of the audit table
// by row and column.
func cellTexts(av *auditView) map[[2]int]string {
	m := map[[2]int]string{}
	for _, c := range objectsOf[*auditCell](av.table) {
		m[[2]int{c.id.Row, c.id.Col}] = c.text.Text
	}
	return m
}

// rowOfCase returns the display row of the case with source path src.
func rowOfCase(t *testing.T, av *auditView, src string) int {
	t.Helper()
	for n, r := range av.rows {
		if caseLabel(r) == src {
			return n
		}
	}
	t.Fatalf("no row for %s among %d rows", src, len(av.rows))
	return -1
}

// tempFiles lists the temporary files below dir.
func tempFiles(t *testing.T, dir string) []string {
	var out []string
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() && strings.HasSuffix(p, ".tmp") {
			out = append(out, p)
		}
		return nil
	})
	return out
}

func TestAuditViewStandInRunTableAndOpen(t *testing.T) {
	withStandInAnalysis(t)
	tmp := t.TempDir()
	reg := filepath.Join(tmp, "registry")
	fakeAuditCase(t, filepath.Join(reg, "a"))
	fakeAuditCase(t, filepath.Join(reg, "b"), "x", "y")
	fakeAuditCase(t, filepath.Join(reg, "c"), "FAIL")
	fakeAuditCase(t, filepath.Join(reg, "d"), "INCOMPLETE")
	av, opened := testAuditView(t, test.NewTempApp(t), nil)
	out := filepath.Join(tmp, "out")
	av.workers.SetText("2")
	runAuditView(t, av, out, reg)

	if len(av.rows) != 4 {
		t.Fatalf("%d rows, want 4 (%s; %s)", len(av.rows), av.counts.Text, av.message.Text)
	}
	cells := cellTexts(av)
	want := map[string]struct{ status, covered, holes string }{
		// 10 % per file: a holds IM1, b IM1 x y (the stand-in's rule).
		"registry/a": {"ok", "10.0", "1"},
		"registry/b": {"ok", "30.0", "1"},
		"registry/c": {"FAILED", "—", "—"},
		"registry/d": {"INCOMPLETE", "—", "—"},
	}
	for src, w := range want {
		n := rowOfCase(t, av, src)
		if got := cells[[2]int{n, 0}]; got != src {
			t.Errorf("row %d case cell %q, want %q", n, got, src)
		}
		if got := cells[[2]int{n, 1}]; got != w.status {
			t.Errorf("%s: status cell %q, want %q", src, got, w.status)
		}
		if got := cells[[2]int{n, 2}]; got != w.covered {
			t.Errorf("%s: covered cell %q, want %q", src, got, w.covered)
		}
		if got := cells[[2]int{n, 5}]; got != w.holes {
			t.Errorf("%s: holes cell %q, want %q", src, got, w.holes)
		}
	}
	if r := cells[[2]int{rowOfCase(t, av, "registry/c"), columnIndex("reason")}]; !strings.Contains(r, "marker file FAIL") {
		t.Errorf("failed case's reason cell %q", r)
	}
	if !strings.Contains(av.counts.Text, "4 cases: 2 analysed") || !strings.Contains(av.counts.Text, "1 incomplete, 1 failed") {
		t.Errorf("counts %q", av.counts.Text)
	}
	if !strings.Contains(av.message.Text, "summary.csv") {
		t.Errorf("message %q does not name the summary", av.message.Text)
	}

	if !av.openBtn.Disabled() {
		t.Error("Open case is enabled with no row selected")
	}

	// Sorting: tap the "covered %" header; empty values go last.
	var covHeader *tipButton
	for _, b := range objectsOf[*tipButton](av.table) {
		if b.Text == "covered %" {
			covHeader = b
		}
	}
	if covHeader == nil {
		t.Fatal("no header button \"covered %\"")
	}
	av.table.Select(widget.TableCellID{Row: rowOfCase(t, av, "registry/c"), Col: 2})
	test.Tap(covHeader)
	if av.selected < 0 || caseLabel(av.rows[av.selected]) != "registry/c" || !strings.HasPrefix(av.selInfo.Text, "registry/c: FAILED") {
		t.Errorf("after sorting the selection points at row %d (%s)", av.selected, av.selInfo.Text)
	}
	if got := caseLabel(av.rows[0]) + " " + caseLabel(av.rows[1]); got != "registry/a registry/b" {
		t.Errorf("ascending by coverage: %s first", got)
	}
	test.Tap(covHeader)
	if got := caseLabel(av.rows[0]); got != "registry/b" {
		t.Errorf("descending by coverage: %s first", got)
	}
	if math.IsNaN(float64(av.rows[1].Metrics.CoveragePct)) || !math.IsNaN(float64(av.rows[3].Metrics.CoveragePct)) {
		t.Errorf("cases without coverage are not last")
	}

	// Open case: select b, press the button.
	av.table.Select(widget.TableCellID{Row: rowOfCase(t, av, "registry/b"), Col: 0})
	test.Tap(av.openBtn)
	if len(*opened) != 1 || (*opened)[0] != filepath.Join(reg, "b") {
		t.Fatalf("opened %v, want %s", *opened, filepath.Join(reg, "b"))
	}
	// A double tap on a cell opens its case.
	n := rowOfCase(t, av, "registry/d")
	for _, c := range objectsOf[*auditCell](av.table) {
		if c.id.Row == n && c.id.Col == 3 {
			test.DoubleTap(c)
			break
		}
	}
	if len(*opened) != 2 || (*opened)[1] != filepath.Join(reg, "d") {
		t.Errorf("after a double tap opened %v, want %s last", *opened, filepath.Join(reg, "d"))
	}

	// The same audit opened again in a new window: the rows come from the
	// records, and the input folders from the preferences.
	av2, opened2 := testAuditView(t, av.app, nil)
	mark := av2.finished.Load()
	av2.loadExisting(out)
	waitAudit(t, av2, mark, 1)
	if len(av2.rows) != 4 || !strings.Contains(av2.counts.Text, "1 incomplete · 1 failed") {
		t.Fatalf("existing audit: %d rows, %q, %q", len(av2.rows), av2.counts.Text, av2.message.Text)
	}
	if !strings.Contains(av2.message.Text, "Settings of this audit: Threshold 240 CEM43 min · margin 3 mm") {
		t.Errorf("message %q lacks the audit's settings (the defaults: cem43, 240)", av2.message.Text)
	}
	if len(av2.inputs) != 1 || av2.inputs[0] != reg {
		t.Errorf("inputs of the earlier audit %v, want [%s]", av2.inputs, reg)
	}
	av2.table.Select(widget.TableCellID{Row: rowOfCase(t, av2, "registry/a"), Col: 0})
	av2.openSelected()
	if len(*opened2) != 1 || (*opened2)[0] != filepath.Join(reg, "a") {
		t.Errorf("opened %v from the existing audit, want %s", *opened2, filepath.Join(reg, "a"))
	}
}

func TestAuditViewCancelAndResume(t *testing.T) {
	withStandInAnalysis(t)
	tmp := t.TempDir()
	reg := filepath.Join(tmp, "registry")
	// Distinct files, so that the cases' input hashes differ.
	fakeAuditCase(t, filepath.Join(reg, "a"), "a1")
	fakeAuditCase(t, filepath.Join(reg, "b"), "b1", "SLOW")
	fakeAuditCase(t, filepath.Join(reg, "c"), "c1")
	av, _ := testAuditView(t, test.NewTempApp(t), nil)
	out := filepath.Join(tmp, "out")
	av.addInput(reg)
	av.outEntry.SetText(out)
	av.workers.SetText("1")
	mark := av.finished.Load()
	for len(standInStarted) > 0 {
		<-standInStarted
	}
	test.Tap(av.runBtn)
	if av.runBtn.Disabled() == false || av.cancelBtn.Disabled() {
		t.Error("while running, Run should be disabled and Cancel enabled")
	}
	select {
	case id := <-standInStarted:
		if id != "registry__b" {
			t.Fatalf("slow case %s started", id)
		}
	case <-time.After(60 * time.Second):
		t.Fatal("the slow case never started")
	}
	test.Tap(av.cancelBtn)
	waitAudit(t, av, mark, 1)
	if !strings.Contains(av.message.Text, "cancelled") || !strings.Contains(av.message.Text, "Resume") {
		t.Errorf("message after cancel: %q", av.message.Text)
	}
	if len(av.rows) != 1 || av.rows[0].Case != "registry__a" {
		t.Fatalf("rows after cancel: %+v", av.rows)
	}
	// Nothing half-written: one record, no summary, no temporary file.
	recs, _ := filepath.Glob(filepath.Join(out, "cases", "*", audit.RecordFile))
	if len(recs) != 1 {
		t.Errorf("records after cancel: %v", recs)
	}
	if _, err := os.Stat(filepath.Join(out, "summary.csv")); err == nil {
		t.Error("a cancelled audit wrote summary.csv")
	}
	if tf := tempFiles(t, out); len(tf) > 0 {
		t.Errorf("temporary files left: %v", tf)
	}
	if av.runBtn.Disabled() {
		t.Error("Run stays disabled after the cancel")
	}

	// Resume: a comes from the earlier run, b and c are analysed.
	os.Remove(filepath.Join(reg, "b", "SLOW"))
	av.resume.SetChecked(true)
	mark = av.finished.Load()
	test.Tap(av.runBtn)
	waitAudit(t, av, mark, 1)
	if len(av.rows) != 3 {
		t.Fatalf("%d rows after resuming, want 3 (%s)", len(av.rows), av.message.Text)
	}
	if got := statusWord(av.rows[rowOfCase(t, av, "registry/a")]); got != "ok (earlier run)" {
		t.Errorf("case a after resuming: %q", got)
	}
	if !strings.Contains(av.counts.Text, "(1 from an earlier run)") {
		t.Errorf("counts %q", av.counts.Text)
	}
}

func TestAuditViewRefusals(t *testing.T) {
	withStandInAnalysis(t)
	tmp := t.TempDir()
	reg := filepath.Join(tmp, "registry")
	fakeAuditCase(t, filepath.Join(reg, "a"))
	av, _ := testAuditView(t, test.NewTempApp(t), nil)

	// Typed input folders: a missing path and a file are refused, a folder
	// is added once.
	notes := filepath.Join(tmp, "notes.txt")
	os.WriteFile(notes, []byte("x"), 0o644)
	for _, c := range []struct{ path, want string }{
		{filepath.Join(tmp, "missing"), "no such file"},
		{notes, "is not a folder"},
		{reg, ""},
		{reg + string(filepath.Separator), ""},
	} {
		av.inputEntry.SetText(c.path)
		av.inputEntry.TypedKey(&fyne.KeyEvent{Name: fyne.KeyReturn})
		if c.want != "" && (!strings.Contains(av.message.Text, c.want) || !strings.Contains(av.message.Text, c.path)) {
			t.Errorf("typed %s: message %q, want %q", c.path, av.message.Text, c.want)
		}
	}
	if len(av.inputs) != 1 || av.inputs[0] != reg || av.inputEntry.Text != "" {
		t.Fatalf("inputs %v, entry %q after typing", av.inputs, av.inputEntry.Text)
	}

	// An output folder inside the input: the engine's refusal is shown and
	// nothing is written.
	inside := filepath.Join(reg, "results")
	runAuditView(t, av, inside, reg)
	if !strings.Contains(av.message.Text, "inside the input folder") || av.message.Importance != widget.DangerImportance || !av.message.Visible() {
		t.Errorf("message %q (importance %v)", av.message.Text, av.message.Importance)
	}
	if _, err := os.Stat(inside); err == nil {
		t.Error("the refused output folder was created")
	}

	for _, c := range []struct {
		name, workers, settings, want string
	}{
		{"bad workers", "0", "", "workers"},
		{"missing settings file", "1", filepath.Join(tmp, "none.json"), "settings"},
		{"unknown key", "1", "bad.json", "unknown field"},
	} {
		av.workers.SetText(c.workers)
		av.outEntry.SetText(filepath.Join(tmp, "out"))
		if c.settings != "" {
			p := c.settings
			if !filepath.IsAbs(p) {
				p = filepath.Join(tmp, p)
				os.WriteFile(p, []byte(`{"treshold": 100}`), 0o644)
			}
			av.fileEntry.SetText(p)
			av.source.SetSelected(settingsFromFile)
		}
		test.Tap(av.runBtn)
		if !strings.Contains(av.message.Text, "Cannot start") || !strings.Contains(av.message.Text, c.want) {
			t.Errorf("%s: message %q, want %q", c.name, av.message.Text, c.want)
		}
		if av.running {
			t.Fatalf("%s: the audit started", c.name)
		}
	}

	// A good settings file is what the run stores.
	good := filepath.Join(tmp, "good.json")
	os.WriteFile(good, []byte(`{"threshold": 100, "margin_mm": 2}`), 0o644)
	av.fileEntry.SetText(good)
	if !strings.Contains(av.settInfo.Text, "Threshold 100") || !strings.Contains(av.settInfo.Text, "margin 2 mm") {
		t.Errorf("settings line %q", av.settInfo.Text)
	}
	mark := av.finished.Load()
	test.Tap(av.runBtn)
	waitAudit(t, av, mark, 1)
	s, err := audit.LoadSettings(filepath.Join(tmp, "out", "settings.json"))
	if err != nil || s.Threshold != 100 || s.MarginMM != 2 {
		t.Errorf("stored settings %+v, %v", s, err)
	}
}

func TestAuditViewFromMenu(t *testing.T) {
	rw := testWindow(t)
	var item *fyne.MenuItem
	for _, m := range rw.mainMenu().Items {
		for _, it := range m.Items {
			if it.Label == "Audit many cases…" {
				item = it
			}
		}
	}
	if item == nil {
		t.Fatal("no menu item \"Audit many cases…\"")
	}
	rw.settings.Excluded = []int{2}
	rw.settings.Thermometry.DriftReference = &review.Rect{U: dosemap.Vec3{1, 0, 0}, V: dosemap.Vec3{0, 1, 0}, W: 10, H: 10}
	item.Action()
	av := auditWindows[rw]
	if av == nil {
		t.Fatal("the menu item opened no audit window")
	}
	t.Cleanup(av.win.Close)
	// The review window's settings: 240 CEM43 (Sapareto & Dewey 1984,
	// the default threshold) with its exclusions not carried over.
	if !strings.Contains(av.settInfo.Text, "Threshold 240") || !strings.Contains(av.settInfo.Text, "not left out of the audit") ||
		!strings.Contains(av.settInfo.Text, "drift reference region drawn on the open case is not used") {
		t.Errorf("settings line %q", av.settInfo.Text)
	}
	s, _, _, err := av.settings()
	if err != nil || len(s.Excluded) != 0 || s.Threshold != rw.settings.Threshold || s.Thermometry.DriftReference != nil {
		t.Errorf("audit settings %+v, %v", s, err)
	}
	item.Action()
	if auditWindows[rw] != av {
		t.Error("a second click opened a second audit window")
	}
}

// TestAuditViewRealAnalysis audits one simulated session (dosemap/sim)
// and, from a second input folder, a copy of it without its RTSTRUCT with
// the real analysis.
func TestAuditViewRealAnalysis(t *testing.T) {
	if testing.Short() {
		t.Skip("simulates and analyses a session; skipped with -short")
	}
	tmp := t.TempDir()
	reg := filepath.Join(tmp, "registry")
	s := sim.VariedSession(1, 7)
	full := filepath.Join(reg, s.Label)
	if err := os.MkdirAll(full, 0o755); err != nil {
		t.Fatal(err)
	}
	truth, err := sim.WriteSession(full, s)
	if err != nil {
		t.Fatal(err)
	}
	// The copy shares the study of the original, so it lies below a second
	// input folder (below the same one, both would read as series of one
	// case).
	other := filepath.Join(tmp, "other")
	bare := filepath.Join(other, "no-contours")
	filepath.WalkDir(full, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() || strings.Contains(p, string(filepath.Separator)+"structures"+string(filepath.Separator)) {
			return err
		}
		rel, _ := filepath.Rel(full, p)
		b, _ := os.ReadFile(p)
		os.MkdirAll(filepath.Dir(filepath.Join(bare, rel)), 0o755)
		return os.WriteFile(filepath.Join(bare, rel), b, 0o644)
	})
	set := review.DefaultSettings()
	set.Trials = 0 // keeps the test short
	av, opened := testAuditView(t, test.NewTempApp(t), func() (review.Settings, string, string) { return set, "test settings", "" })
	out := filepath.Join(tmp, "out")
	runAuditView(t, av, out, reg, other)
	if len(av.rows) != 2 {
		t.Fatalf("%d rows (%s; %s)", len(av.rows), av.counts.Text, av.message.Text)
	}
	cells := cellTexts(av)
	n := rowOfCase(t, av, "registry/"+s.Label)
	r := av.rows[n]
	if r.Status != audit.StatusOK || cells[[2]int{n, 1}] != "ok" {
		t.Fatalf("%s: %s %q", s.Label, r.Status, r.Reason)
	}
	// Covered fraction against the simulator's CEM43 of its own noiseless
	// thermometry; 6 percentage points as in the audit package's test of
	// the same family of cases (noise, drift correction and partial
	// boundary voxels; judgement).
	if d := float64(r.Metrics.CoveragePct) - 100*truth.Measured.CoveredFraction; math.Abs(d) > 6 &&
		math.Abs(float64(r.Metrics.CoverageOfTargetPct)-100*truth.Measured.CoveredFraction) > 6 {
		t.Errorf("covered %.1f %%, noiseless thermometry gives %.1f %%", float64(r.Metrics.CoveragePct), 100*truth.Measured.CoveredFraction)
	}
	if got := cells[[2]int{n, 2}]; got != pctCell(r.Metrics.CoveragePct) || got == "—" {
		t.Errorf("covered cell %q", got)
	}
	if cells[[2]int{n, 3}] != "—" {
		t.Errorf("p05–p95 cell %q without noise trials", cells[[2]int{n, 3}])
	}
	if len(r.Artifacts) == 0 {
		t.Error("no report written for the analysed case")
	}
	m := rowOfCase(t, av, "other/no-contours")
	if av.rows[m].Status != audit.StatusIncomplete || cells[[2]int{m, 1}] != "INCOMPLETE" || !strings.Contains(cells[[2]int{m, columnIndex("reason")}], "contour") {
		t.Errorf("case without contours: %q %q", cells[[2]int{m, 1}], cells[[2]int{m, columnIndex("reason")}])
	}
	av.table.Select(widget.TableCellID{Row: n, Col: 0})
	test.Tap(av.openBtn)
	if len(*opened) != 1 || (*opened)[0] != full {
		t.Errorf("opened %v, want %s", *opened, full)
	}
}

func TestAuditViewDeidentified(t *testing.T) {
	withStandInAnalysis(t)
	tmp := t.TempDir()
	reg := filepath.Join(tmp, "registry")
	fakeAuditCase(t, filepath.Join(reg, "smith"), "s1")
	fakeAuditCase(t, filepath.Join(reg, "jones"), "j1")
	av, opened := testAuditView(t, test.NewTempApp(t), nil)
	hidden := 0
	av.hideIdentity = func() { hidden++ }
	av.deid.SetChecked(true)
	runAuditView(t, av, filepath.Join(tmp, "out"), reg)
	if len(av.rows) != 2 {
		t.Fatalf("%d rows (%s)", len(av.rows), av.message.Text)
	}
	for k, text := range cellTexts(av) {
		if strings.Contains(text, "smith") || strings.Contains(text, "jones") || strings.Contains(text, "registry") {
			t.Errorf("cell %v of a de-identified audit shows %q", k, text)
		}
	}
	// Pseudonyms: "case-" and 12 hex digits of the input hash (the
	// engine's rule).
	r := av.rows[0]
	if !strings.HasPrefix(r.Case, "case-") || len(r.Case) != 17 || r.Case[5:] != r.InputSHA256[:12] {
		t.Errorf("pseudonym %q for input hash %s", r.Case, r.InputSHA256)
	}
	av.table.Select(widget.TableCellID{Row: 0, Col: 0})
	test.Tap(av.openBtn)
	if hidden != 1 || len(*opened) != 1 {
		t.Fatalf("hide identity called %d times, opened %v", hidden, *opened)
	}
	if b := filepath.Base((*opened)[0]); b != "smith" && b != "jones" {
		t.Errorf("opened %s", (*opened)[0])
	}
	// An earlier de-identified audit: its source folders are recorded
	// nowhere, and the window says so.
	av2, opened2 := testAuditView(t, av.app, nil)
	mark := av2.finished.Load()
	av2.loadExisting(filepath.Join(tmp, "out"))
	waitAudit(t, av2, mark, 1)
	av2.table.Select(widget.TableCellID{Row: 0, Col: 0})
	if _, err := av2.sourceDir(av2.rows[0]); err == nil || !strings.Contains(err.Error(), "de-identified") {
		t.Errorf("source of a case of an earlier de-identified audit: %v", err)
	}
	av2.openSelected()
	if len(*opened2) != 0 {
		t.Errorf("opened %v", *opened2)
	}
}

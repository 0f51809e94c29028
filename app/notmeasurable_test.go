//go:build cgo

package main

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"gonum.org/v1/plot"

	"dosecover/dosemap/sim"
)

// TestNotMeasurableEverywhere analyses a simulated session whose
// thermometry leaves no part of the target monitored (one 3 mm plane
// through each of 35 foci on five depths: every part of the target lies
// within reach of a sonication that did not measure it; see
// review.TestSinglePlaneSession) with each command: the coverage of the
// monitored target is null in analyze's JSON, "not measurable" in its
// text, in the report PDF (text extracted by poppler's pdftotext) and in
// the audit's summary.csv and in the window's figures, and never "0.0 %"
// on those lines.
func TestNotMeasurableEverywhere(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses a 35-sonication session")
	}
	tmp := t.TempDir()
	dir := filepath.Join(tmp, "cases", "single-plane")
	s := sim.PlanesSession(sim.LayoutMovingSlab, 5)
	s.Thermometry.Slices = 1
	if _, err := sim.WriteSession(dir, s); err != nil {
		t.Fatal(err)
	}

	code, stdout, stderr := runCmd("analyze", "--trials", "0", "--json", "-", dir)
	if code != 0 {
		t.Fatalf("analyze --json: exit %d: %s", code, stderr)
	}
	var doc map[string]any
	if err := json.Unmarshal([]byte(stdout), &doc); err != nil {
		t.Fatal(err)
	}
	if v, ok := doc["covered_fraction"]; !ok || v != nil || doc["monitored_volume_ml"] != 0.0 {
		t.Errorf("JSON covered_fraction %v (present %v), monitored %v mL; want null and 0", v, ok, doc["monitored_volume_ml"])
	}
	// Every other fraction of the monitored target is null too (schema 4).
	if dvh, _ := doc["dvh"].(map[string]any); dvh == nil || dvh["target"] != nil {
		t.Errorf("JSON dvh.target not null")
	}
	for _, list := range []string{"coverage_vs_threshold", "sonications"} {
		items, _ := doc[list].([]any)
		if len(items) == 0 {
			t.Errorf("JSON %s: empty", list)
		}
	items:
		for _, it := range items {
			m, _ := it.(map[string]any)
			for _, k := range []string{"covered_fraction", "added_coverage", "cumulative_coverage"} {
				if v, ok := m[k]; ok && v != nil {
					t.Errorf("JSON %s: %s %v, want null", list, k, v)
					break items
				}
			}
		}
	}

	code, stdout, stderr = runCmd("analyze", "--trials", "0", dir)
	if code != 0 {
		t.Fatalf("analyze: exit %d: %s", code, stderr)
	}
	checkLines(t, "analyze text", stdout, "Covered")
	if _, table, _ := strings.Cut(stdout, "coverage added"); !strings.Contains(table, "     1 ") || strings.Count(table, "not measurable") < 35 {
		t.Errorf("analyze text: the sonication table does not say \"not measurable\" for each added coverage:\n%s", table)
	}

	pdf, metricsCSV := filepath.Join(tmp, "report.pdf"), filepath.Join(tmp, "metrics.csv")
	if code, _, stderr = runCmd("report", "--trials", "0", "--pdf", pdf, "--csv", metricsCSV, dir); code != 0 {
		t.Fatalf("report: exit %d: %s", code, stderr)
	}
	// The metrics CSV leaves out what is not measurable (README, "Metrics
	// files"): no covered fraction of the monitored target, no coverage
	// added by a sonication.
	if b, err := os.ReadFile(metricsCSV); err != nil {
		t.Error(err)
	} else if m := regexp.MustCompile(`(?m)^(target\.covered_fraction|sonication\.\d+\.coverage_added),.*$`).FindString(string(b)); m != "" {
		t.Errorf("metrics CSV: %q for a target with no monitored part", m)
	}
	if d := os.Getenv("DOSECOVER_SHOTS"); d != "" {
		if b, err := os.ReadFile(pdf); err == nil {
			_ = os.WriteFile(filepath.Join(d, "report-not-measurable.pdf"), b, 0o644)
		}
	}
	txt, err := exec.Command("pdftotext", "-layout", pdf, "-").Output()
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("pdftotext (poppler-utils) is required in CI: %v", err)
		}
		t.Logf("pdftotext not available (%v): report PDF not checked", err)
	} else {
		checkLines(t, "report PDF", string(txt), "Covered (")
		// The headline figure, "not" over "measurable" above its label.
		_, after, _ := strings.Cut(string(txt), "Coverage")
		if head := strings.Fields(after); len(head) < 1 || head[0] != "not" {
			t.Errorf("report PDF: headline figure %q, want \"not measurable\":\n%s", head[:min(3, len(head))], txt)
		}
		// The two curves have no points: their titles say why the axes
		// are empty.
		for _, want := range []string{"Target dose-volume histogram: not measurable", "Coverage versus threshold: not measurable"} {
			if !strings.Contains(string(txt), want) {
				t.Errorf("report PDF: no %q above the empty plot", want)
			}
		}
	}

	// The window: the figures panel says it, and no 0.0 % for the
	// monitored target.
	rw := testWindow(t)
	mark := rw.completed.Load()
	rw.openFolder(dir, false)
	waitJobs(t, rw, mark, 2) // the load, then the analysis
	if rw.result == nil {
		t.Fatalf("window: not analysed: %s", rw.status.Text)
	}
	checkLines(t, "window figures", rw.metrics.facts.Text, "Covered")
	for _, row := range rw.result.SonRows {
		if !math.IsNaN(row.CoverageAdded) {
			t.Errorf("window: sonication %d added %.3f of a target with no monitored part, want no figure", row.Number, row.CoverageAdded)
			break
		}
	}
	if len(rw.result.DVHPoints) != 0 {
		t.Errorf("window: a target DVH of %d points for a target with no monitored part", len(rw.result.DVHPoints))
	}
	for _, p := range []*plot.Plot{dvhPlot(rw.result), coveragePlot(rw.result)} {
		if !strings.HasSuffix(p.Title.Text, ": not measurable") {
			t.Errorf("window: plot title %q over empty axes, want it to end \": not measurable\"", p.Title.Text)
		}
	}
	if d := os.Getenv("DOSECOVER_SHOTS"); d != "" {
		writePNG(t, filepath.Join(d, "window-not-measurable.png"), rw.win.Canvas().Capture())
	}

	out := filepath.Join(tmp, "audit")
	if code, _, stderr = runCmd("audit", "--trials", "0", filepath.Join(tmp, "cases"), "-o", out); code != 0 {
		t.Fatalf("audit: exit %d: %s", code, stderr)
	}
	f, err := os.Open(filepath.Join(out, "summary.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil || len(rows) != 2 {
		t.Fatalf("summary.csv: %d rows, %v", len(rows), err)
	}
	for n, h := range rows[0] {
		if h == "coverage_pct" && rows[1][n] != "not measurable" {
			t.Errorf("summary.csv coverage_pct %q, want \"not measurable\"", rows[1][n])
		}
	}
}

// checkLines fails unless some line of text holding prefix says "not
// measurable", and when any such line shows "0.0 %" for the monitored
// target.
func checkLines(t *testing.T, what, text, prefix string) {
	t.Helper()
	found := false
	for _, l := range strings.Split(text, "\n") {
		if !strings.Contains(l, prefix) {
			continue
		}
		if strings.Contains(l, "not measurable") {
			found = true
		}
		if strings.Contains(l, "0.0 % of the monitored") {
			t.Errorf("%s: %q shows 0.0 %% of the monitored target", what, l)
		}
	}
	if !found {
		t.Errorf("%s: no line %q... saying \"not measurable\":\n%s", what, prefix, text)
	}
}

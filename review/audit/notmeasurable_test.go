package audit

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/review"
)

// TestCoverageNotMeasurable: a result with no part of its target
// monitored (covered fraction nil) gives a null coverage in the record and
// "not measurable" in summary.csv's coverage_pct, where a failed case
// leaves the cell empty; records written before, with a coverage of 0 and
// the whole target not monitored, read as not measurable; a sonication
// with more drift removed than the settings' drift_flag_c is flagged.
func TestCoverageNotMeasurable(t *testing.T) {
	r := &review.Result{Settings: review.DefaultSettings(),
		Coverage: review.Coverage{TargetVolumeML: 3.5, NotMonitoredML: 3.5, NotMonitoredFraction: 1},
		Quality:  []review.SonicationQuality{{Sonication: 4, MaxDriftC: 1.6}, {Sonication: 5, MaxDriftC: 0.4}}}
	m := MetricsOf(r)
	b, err := json.Marshal(m)
	if err != nil || !strings.Contains(string(b), `"coverage_pct":null`) {
		t.Errorf("record metrics %s (%v), want coverage_pct null", b, err)
	}
	col := -1
	for n, h := range Header(nil) {
		if h == "coverage_pct" {
			col = n
		}
	}
	if got := (Row{Case: "a", Status: StatusOK, Metrics: m}).Record(nil)[col]; got != "not measurable" {
		t.Errorf("analysed case: coverage_pct cell %q, want \"not measurable\"", got)
	}
	if got := (Row{Case: "b", Status: StatusFailed, Metrics: NoMetrics()}).Record(nil)[col]; got != "" {
		t.Errorf("failed case: coverage_pct cell %q, want empty", got)
	}
	for _, c := range []struct {
		js   string
		want float64 // NaN: not measurable
	}{
		{`{"coverage_pct": 0, "not_monitored_pct": 100}`, math.NaN()},
		{`{"coverage_pct": 0, "not_monitored_pct": 40}`, 0},
		{`{"coverage_pct": 87.5, "not_monitored_pct": 0}`, 87.5},
		{`{"coverage_pct": null, "not_monitored_pct": 100}`, math.NaN()},
	} {
		var got Metrics
		if err := json.Unmarshal([]byte(c.js), &got); err != nil {
			t.Fatal(err)
		}
		if g := float64(got.CoveragePct); !(g == c.want || math.IsNaN(g) && math.IsNaN(c.want)) {
			t.Errorf("%s: coverage %v, want %v", c.js, g, c.want)
		}
	}
	flags := strings.Join(FlagsOf(r), "; ")
	if !strings.Contains(flags, "sonication 4: drift 1.60 °C removed, above 1 °C") || strings.Contains(flags, "sonication 5") {
		t.Errorf("flags %q, want sonication 4's drift only", flags)
	}
}

// TestOldRecordsRead: per-case records whose analysis is of result schema
// 2, 3 or 4 (README, "Result file") read on, the target with no monitored
// part giving "not measurable" in summary.csv's coverage_pct in each: a
// schema 2 record held a coverage of 0 there (read as not measurable), a
// schema 3 record null beside zeros for the DVH and the sonications'
// coverage, a schema 4 record null throughout. Covered parts of a
// monitored target read unchanged.
func TestOldRecordsRead(t *testing.T) {
	dir := t.TempDir()
	col := -1
	for n, h := range Header(nil) {
		if h == "coverage_pct" {
			col = n
		}
	}
	for _, c := range []struct {
		name, metrics, analysis string
		want                    string // coverage_pct cell
	}{
		{"schema 2", `{"target_ml": 3.5, "coverage_pct": 0, "not_monitored_pct": 100, "holes": 0}`,
			`{"schema_version": 2, "covered_fraction": 0, "dvh": {"dose": [1], "target": [0]}, "coverage_vs_threshold": [{"threshold": 240, "covered_fraction": 0}], "sonications": [{"number": 1, "added_coverage": 0, "cumulative_coverage": 0}]}`,
			"not measurable"},
		{"schema 3", `{"target_ml": 3.5, "coverage_pct": null, "not_monitored_pct": 100, "holes": 0}`,
			`{"schema_version": 3, "covered_fraction": null, "dvh": {"dose": [1], "target": [0]}, "coverage_vs_threshold": [], "sonications": [{"number": 1, "added_coverage": 0, "cumulative_coverage": 0}]}`,
			"not measurable"},
		{"schema 4", `{"target_ml": 3.5, "coverage_pct": null, "not_monitored_pct": 100, "holes": 0}`,
			`{"schema_version": 4, "covered_fraction": null, "dvh": {"dose": [1], "target": null}, "coverage_vs_threshold": [{"threshold": 240, "covered_fraction": null}], "sonications": [{"number": 1, "added_coverage": null, "cumulative_coverage": null}]}`,
			"not measurable"},
		{"schema 3, monitored", `{"target_ml": 3.5, "coverage_pct": 87.5, "not_monitored_pct": 0, "holes": 1}`,
			`{"schema_version": 3, "covered_fraction": 0.875}`,
			"87.5"},
	} {
		p := filepath.Join(dir, strings.ReplaceAll(c.name, " ", "_")+".json")
		js := `{"case": "c", "status": "ok", "input_sha256": "ab", "settings_sha256": "cd", "settings": {}, "metrics": ` +
			c.metrics + `, "quality_flags": [], "artifacts": [], "analysis": ` + c.analysis + `, "caution": "x"}`
		if err := os.WriteFile(p, []byte(js), 0o644); err != nil {
			t.Fatal(err)
		}
		rec, err := ReadRecord(p)
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		if got := rowOf(rec).Record(nil)[col]; got != c.want {
			t.Errorf("%s: coverage_pct cell %q, want %q", c.name, got, c.want)
		}
	}
}

package audit

import (
	"encoding/json"
	"math"
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

package audit

import (
	"context"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap/testkit"
	"dosecover/review"
)

func TestLoadSettings(t *testing.T) {
	dir := t.TempDir()
	def := review.DefaultSettings()
	for _, c := range []struct {
		name, body string
		ok         bool
		check      func(review.Settings) bool
	}{
		{"defaults when keys are left out", `{}`, true, func(s review.Settings) bool {
			return s.Threshold == def.Threshold && s.MarginMM == def.MarginMM && s.Model == def.Model && s.Trials == def.Trials
		}},
		{"brain threshold and wider margin", `{"threshold": 100, "margin_mm": 5, "trials": 0}`, true, func(s review.Settings) bool {
			return s.Threshold == 100 && s.MarginMM == 5 && s.Trials == 0 && s.Model == "cem43"
		}},
		{"arrhenius", `{"model": "arrhenius", "threshold": 1}`, true, func(s review.Settings) bool { return s.Model == "arrhenius" }},
		{"unknown key", `{"treshold": 100}`, false, nil},
		{"bad model", `{"model": "dose"}`, false, nil},
		{"zero threshold", `{"threshold": 0}`, false, nil},
		{"negative margin", `{"margin_mm": -1}`, false, nil},
		{"margin too large", `{"margin_mm": 500}`, false, nil},
		{"negative trials", `{"trials": -5}`, false, nil},
		{"per-case exclusions", `{"excluded_sonications": [2]}`, false, nil},
		{"two values", `{} {}`, false, nil},
		{"not JSON", `threshold=240`, false, nil},
	} {
		p := filepath.Join(dir, "s.json")
		os.WriteFile(p, []byte(c.body), 0o644)
		s, err := LoadSettings(p)
		if (err == nil) != c.ok {
			t.Errorf("%s: err %v, want ok=%v", c.name, err, c.ok)
			continue
		}
		if err != nil && !strings.Contains(err.Error(), p) {
			t.Errorf("%s: error %q does not name the file", c.name, err)
		}
		if c.check != nil && !c.check(s) {
			t.Errorf("%s: settings %+v", c.name, s)
		}
	}
	if s, err := LoadSettings(""); err != nil || s.Threshold != def.Threshold {
		t.Errorf("no file: %+v %v", s, err)
	}
	if _, err := LoadSettings(filepath.Join(dir, "missing.json")); err == nil {
		t.Error("missing file: no error")
	}
}

// TestMetricsOf checks the unit conversions from a Result: fractions to
// percent, mm³ to mL (1 mL = 1000 mm³), avoid volumes summed, the largest
// hole taken.
func TestMetricsOf(t *testing.T) {
	cov, p05, p95 := 0.95, 0.91, 0.97
	r := &review.Result{
		Coverage: review.Coverage{
			TargetVolumeML: 4.2, CoveredFraction: &cov, CoveredFractionOfTarget: 0.9,
			CoveredFractionP05: &p05, CoveredFractionP95: &p95, NotMonitoredFraction: 0.05,
		},
		Holes:                 []review.Hole{{VolumeMM3: 120}, {VolumeMM3: 80}},
		OutsideMarginLethalML: 0.35,
		Avoid:                 []review.AvoidDose{{Name: "a", LethalVolumeMM3: 10}, {Name: "b", LethalVolumeMM3: 15}},
	}
	m := MetricsOf(r)
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"target", float64(m.TargetML), 4.2},
		{"coverage", float64(m.CoveragePct), 95},
		{"coverage of target", float64(m.CoverageOfTargetPct), 90},
		{"p05", float64(m.CoverageP05Pct), 91},
		{"p95", float64(m.CoverageP95Pct), 97},
		{"not monitored", float64(m.NotMonitoredPct), 5},
		{"largest hole", float64(m.LargestHoleML), 0.12},
		{"outside", float64(m.OutsideMarginML), 0.35},
		{"avoid", float64(m.AvoidLethalML), 0.025},
	} {
		if math.Abs(c.got-c.want) > 1e-12 { // exact arithmetic up to rounding
			t.Errorf("%s = %v, want %v", c.name, c.got, c.want)
		}
	}
	if m.Holes != 2 {
		t.Errorf("holes %d", m.Holes)
	}
	r.CoveredFractionP05, r.Holes = nil, nil
	m = MetricsOf(r)
	if !math.IsNaN(float64(m.CoverageP05Pct)) || m.LargestHoleML != 0 || m.Holes != 0 {
		t.Errorf("without trials and holes: %+v", m)
	}
}

// TestAnalyzerIncompleteAndCorrupt runs the real analysis on folders made
// of python3-pydicom's test files: anatomy only and a structure set only
// are incomplete (no thermometry); a garbage .dcm beside them fails the
// case and is named.
func TestAnalyzerIncompleteAndCorrupt(t *testing.T) {
	src := testkit.PydicomTestFiles(t)
	copyFile := func(dst, name string) {
		b, err := os.ReadFile(filepath.Join(src, name))
		if err != nil {
			t.Fatal(err)
		}
		writeFiles(t, dst, map[string][]byte{name: b})
	}
	root := t.TempDir()
	anat := filepath.Join(root, "anatomy-only")
	copyFile(anat, "MR_small.dcm")
	rts := filepath.Join(root, "contours-only")
	copyFile(rts, "rtstruct.dcm")
	bad := filepath.Join(root, "corrupt")
	copyFile(bad, "MR_small.dcm")
	writeFiles(t, bad, map[string][]byte{"IM0002.dcm": []byte("\x13\x37 these bytes are not a DICOM file \xff\xfe")})

	a := NewAnalyzer(review.DefaultSettings(), nil)
	for _, c := range []struct {
		dir        string
		incomplete bool
		mention    string
	}{
		{anat, true, "thermometry"},
		{rts, true, "thermometry"},
		{bad, false, "IM0002.dcm"},
	} {
		cs, _, err := Discover([]string{c.dir})
		if err != nil {
			t.Fatal(err)
		}
		_, err = a(context.Background(), &cs[0])
		var inc *IncompleteError
		if err == nil || errors.As(err, &inc) != c.incomplete || !strings.Contains(err.Error(), c.mention) {
			t.Errorf("%s: err %v; want incomplete=%v mentioning %q", filepath.Base(c.dir), err, c.incomplete, c.mention)
		}
	}
}

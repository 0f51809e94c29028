package report

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// TestFromResultNumbers checks that the report carries the analysis'
// numbers unchanged: the metrics equal the Result's fields (exact float64
// equality after the mL conversion, which is the same division).
func TestFromResultNumbers(t *testing.T) {
	_, r, in := phantomInput(t, false)
	m := map[string]float64{}
	for _, x := range in.Metrics() {
		m[x.Name] = x.Value
	}
	want := map[string]float64{
		"threshold":                         r.Threshold,
		"margin_mm":                         r.MarginMM,
		"target.volume_ml":                  r.TargetVolumeML,
		"target.covered_fraction":           r.CoveredFraction,
		"target.covered_fraction_of_target": r.CoveredFractionOfTarget,
		"target.not_monitored_fraction":     r.NotMonitoredFraction,
		"lethal_ml":                         r.LethalVolumeML,
		"outside.lethal_ml":                 r.OutsideMarginLethalML,
		"holes.count":                       float64(len(r.Holes)),
		"outside.count":                     float64(len(r.OutsideClusters)),
		"holes.1.volume_ml":                 r.Holes[0].VolumeMM3 / 1000,
		"outside.1.volume_ml":               r.OutsideClusters[0].VolumeMM3 / 1000,
		"avoid.nerve.lethal_ml":             r.Avoid[0].LethalVolumeMM3 / 1000,
		"sonication.2.outside_added_ml":     r.Sonications[1].OutsideAddedML,
	}
	if r.D50 != nil {
		want["target.d50"] = *r.D50
	}
	for k, v := range want {
		got, ok := m[k]
		if !ok {
			t.Errorf("metric %s missing", k)
			continue
		}
		if got != v {
			t.Errorf("metric %s = %v, analysis %v", k, got, v)
		}
	}
	// The phantom was built with one hole and one spill: both must be found.
	if len(r.Holes) == 0 || len(r.OutsideClusters) != 1 {
		t.Fatalf("phantom: %d holes, %d clusters; want at least 1 and exactly 1", len(r.Holes), len(r.OutsideClusters))
	}
	if len(in.Panels) != 3 || in.Panels[1].Title != "Largest hole" || in.Panels[2].Title != "Largest lethal cluster outside margin" {
		t.Errorf("panels %v", titles(in.Panels))
	}
	for _, p := range in.Panels {
		if p.Image == nil || p.Image.Bounds().Dx() != 360 {
			t.Errorf("panel %q: image %v, want 360 px wide", p.Title, p.Image)
		}
	}
	// CSV and JSON agree with Metrics exactly.
	var cbuf, jbuf bytes.Buffer
	if err := WriteCSV(&cbuf, in); err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(&cbuf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if strings.Join(rows[0], ",") != "name,value,unit" || rows[1][0] != "schema_version" || rows[1][1] != strconv.Itoa(SchemaVersion) {
		t.Fatalf("CSV head %v %v", rows[0], rows[1])
	}
	if len(rows)-2 != len(in.Metrics()) {
		t.Errorf("CSV has %d metric rows, want %d", len(rows)-2, len(in.Metrics()))
	}
	for _, row := range rows[2:] {
		v, err := strconv.ParseFloat(row[1], 64)
		if err != nil || v != m[row[0]] {
			t.Errorf("CSV %s = %s, metric %v", row[0], row[1], m[row[0]])
		}
	}
	if err := WriteJSON(&jbuf, in); err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Schema        string   `json:"schema"`
		SchemaVersion int      `json:"schema_version"`
		Metrics       []Metric `json:"metrics"`
		Analysis      struct {
			CoveredFraction float64 `json:"covered_fraction"`
			SchemaVersion   int     `json:"schema_version"`
		} `json:"analysis"`
	}
	if err := json.Unmarshal(jbuf.Bytes(), &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Schema != SchemaName || doc.SchemaVersion != SchemaVersion || len(doc.Metrics) != len(in.Metrics()) {
		t.Errorf("JSON schema %q v%d with %d metrics", doc.Schema, doc.SchemaVersion, len(doc.Metrics))
	}
	if doc.Analysis.CoveredFraction != r.CoveredFraction || doc.Analysis.SchemaVersion == 0 {
		t.Errorf("embedded analysis covered %v (schema %d), want %v", doc.Analysis.CoveredFraction, doc.Analysis.SchemaVersion, r.CoveredFraction)
	}
	for _, x := range doc.Metrics {
		if math.IsNaN(x.Value) || x.Value != m[x.Name] {
			t.Errorf("JSON %s = %v, metric %v", x.Name, x.Value, m[x.Name])
		}
	}
}

func titles(ps []Panel) []string {
	var s []string
	for _, p := range ps {
		s = append(s, p.Title)
	}
	return s
}

func TestFromResultDeidentify(t *testing.T) {
	c, _, in := phantomInput(t, true)
	if strings.Contains(in.CaseLabel, c.Label) || !strings.HasPrefix(in.CaseLabel, "Teaching case ") {
		t.Errorf("label %q", in.CaseLabel)
	}
	if in.ScanDate != "" {
		t.Errorf("scan date %q shown", in.ScanDate)
	}
	dir := t.TempDir()
	out := Outputs{PNG: filepath.Join(dir, "r.png"), PDF: filepath.Join(dir, "r.pdf"), JSON: filepath.Join(dir, "m.json"), CSV: filepath.Join(dir, "m.csv")}
	if err := Write(in, "", out); err != nil {
		t.Fatal(err)
	}
	for _, p := range []string{out.PNG, out.PDF, out.JSON, out.CSV} {
		assertAbsent(t, p, c.Label, "2026-03-14", "20260314")
	}
}

// TestPhantomGolden is the golden image of a report made from an analysis
// (the phantom of phantomCase), panels and all.
func TestPhantomGolden(t *testing.T) {
	_, _, in := phantomInput(t, false)
	img, err := RenderImage(in, goldenDPI)
	if err != nil {
		t.Fatal(err)
	}
	comparePixels(t, img, filepath.Join("testdata", "phantom.png"), 16, 0.001)
}

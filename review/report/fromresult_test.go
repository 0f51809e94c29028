package report

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"math"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/review"
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
		"target.covered_fraction":           (*r.CoveredFraction),
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
		if p.Image == nil || p.Image.Bounds().Dx() != 360 || p.Image.Bounds().Dy() != 295 { // 360 × PanelAspect, rounded
			t.Errorf("panel %q: image %v, want 360×295 px", p.Title, p.Image.Bounds())
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
	if doc.Analysis.CoveredFraction != (*r.CoveredFraction) || doc.Analysis.SchemaVersion == 0 {
		t.Errorf("embedded analysis covered %v (schema %d), want %v", doc.Analysis.CoveredFraction, doc.Analysis.SchemaVersion, (*r.CoveredFraction))
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
	// phantomCase names its avoid structure "Nerve"; a patient of that
	// (invented) name would be hidden from it, and the label and date too.
	c.Patient = dosemap.Patient{Name: "NERVE^INVENTED", StudyDate: "20260314"}
	r, err := review.Analyze(context.Background(), c, review.Settings{Threshold: 240, MarginMM: 3, Model: "cem43"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if in, err = FromResult(c, r, Options{Deidentify: true, PanelPixels: 120}); err != nil {
		t.Fatal(err)
	}
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
		assertAbsent(t, p, c.Label, "2026-03-14", "20260314", "Nerve", "NERVE", "INVENTED")
	}
	// The PDF keeps its text in compressed, subset-encoded streams, so
	// check the text a reader extracts as well.
	txt, err := exec.Command(pdfTool(t, "pdftotext"), out.PDF, "-").CombinedOutput()
	if err != nil {
		t.Fatalf("pdftotext: %v\n%s", err, txt)
	}
	for _, s := range []string{c.Label, "2026-03-14", "Nerve", "NERVE", "INVENTED"} {
		if strings.Contains(string(txt), s) {
			t.Errorf("PDF text shows %q", s)
		}
	}
	if !strings.Contains(string(txt), in.CaseLabel) {
		t.Errorf("PDF text lacks the neutral label %q", in.CaseLabel)
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

func TestDeidentifyResult(t *testing.T) {
	c, r, _ := phantomInput(t, false)
	c.Label = "case INVENTED"
	c.Patient = dosemap.Patient{Name: "NERVE^INVENTED", ID: "ID-42-QQ"}
	r.Case = c.Label
	r.Warnings = append(r.Warnings, "case INVENTED: sonication 1 of ID-42-QQ was resampled")
	r.StudyUID = "2.25.424242" // the original study's UID (PS3.15 Annex E: replaced or removed)
	d := DeidentifyResult(c, r, "Teaching case 0001")
	var buf bytes.Buffer
	if err := d.WriteJSON(&buf); err != nil {
		t.Fatal(err)
	}
	for _, s := range []string{"INVENTED", "ID-42-QQ", "Nerve", "2.25.424242"} {
		if strings.Contains(buf.String(), s) {
			t.Errorf("de-identified result JSON holds %q", s)
		}
	}
	if !strings.Contains(buf.String(), `"case": "Teaching case 0001"`) {
		t.Error("label not set")
	}
	// The original is left as it was.
	if r.Case != "case INVENTED" || r.StudyUID != "2.25.424242" || r.Avoid[0].Name != "Nerve" || !strings.Contains(r.Warnings[len(r.Warnings)-1], "ID-42-QQ") {
		t.Error("DeidentifyResult changed its argument")
	}
}

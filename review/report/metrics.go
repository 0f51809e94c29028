package report

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"
)

// SchemaName and SchemaVersion identify the metrics files (JSON and CSV).
// The version grows whenever a metric is renamed or changes meaning; adding
// metrics keeps it.
const (
	SchemaName    = "dosecover-metrics"
	SchemaVersion = 1
)

// Metric is one named number of the report.
type Metric struct {
	Name  string  `json:"name"`
	Value float64 `json:"value"`
	Unit  string  `json:"unit"` // "1" for fractions, "count", "mL", "mm", "°C", or the dose unit
}

// Metrics returns every number of the report as a flat list, in a fixed
// order. Values that were not computed (NaN) are left out. Names are
// lower-case, dot-separated paths; see README "Metrics files".
func (in *Input) Metrics() []Metric {
	f := in.Facts
	du := doseUnit(in)
	var ms []Metric
	add := func(name string, v float64, unit string) {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return
		}
		ms = append(ms, Metric{Name: name, Value: v, Unit: unit})
	}
	add("threshold", f.Threshold, du)
	add("margin_mm", f.MarginMM, "mm")
	add("target.volume_ml", f.TargetVolumeML, "mL")
	add("target.covered_fraction", f.Covered, "1")
	add("target.covered_fraction_low", f.CoveredLow, "1")
	add("target.covered_fraction_high", f.CoveredHigh, "1")
	add("target.covered_fraction_of_target", f.CoveredOfTarget, "1")
	add("target.not_monitored_fraction", f.NotMonitored, "1")
	add("lethal_ml", f.LethalML, "mL")
	add("target.d98", f.D98, du)
	add("target.d50", f.D50, du)
	add("target.d2", f.D2, du)
	add("holes.count", float64(len(f.Holes)), "count")
	var tot float64
	for _, h := range f.Holes {
		tot += h.VolumeML
	}
	add("holes.total_ml", tot, "mL")
	for n, h := range f.Holes {
		add(fmt.Sprintf("holes.%d.volume_ml", n+1), h.VolumeML, "mL")
		add(fmt.Sprintf("holes.%d.depth_mm", n+1), h.DepthMM, "mm")
	}
	add("outside.lethal_ml", f.OutsideMarginML, "mL")
	add("outside.count", float64(len(f.Outside)), "count")
	for n, c := range f.Outside {
		add(fmt.Sprintf("outside.%d.volume_ml", n+1), c.VolumeML, "mL")
		add(fmt.Sprintf("outside.%d.beyond_target_mm", n+1), c.DepthMM, "mm")
	}
	for _, a := range f.Avoid {
		key := "avoid." + metricKey(a.Name)
		add(key+".lethal_ml", a.LethalML, "mL")
		add(key+".max_dose", a.MaxDose, du)
	}
	for _, s := range in.Sonications {
		key := fmt.Sprintf("sonication.%d", s.Number)
		add(key+".frames", float64(s.Frames), "count")
		add(key+".peak_c", s.PeakC, "°C")
		add(key+".peak_dose", s.PeakDose, du)
		add(key+".lethal_added_ml", s.LethalML, "mL")
		add(key+".coverage_added", s.AddedCoverage, "1")
		add(key+".outside_added_ml", s.OutsideML, "mL")
		add(key+".flagged_frames", float64(s.Flagged), "count")
		ex := 0.0
		if s.Excluded {
			ex = 1
		}
		add(key+".excluded", ex, "1")
		add(key+".cooling_s", s.CoolingS, "s")
		add(key+".residual_rise_c", s.ResidualC, "°C")
	}
	if a := f.AsMeasured; a != nil {
		add("as_measured.covered_fraction", a.Covered, "1")
		add("as_measured.covered_fraction_of_target", a.CoveredOfTarget, "1")
		add("as_measured.outside_lethal_ml", a.OutsideMarginML, "mL")
	}
	q := in.Quality
	add("quality.frames", float64(q.Frames), "count")
	add("quality.flagged_frames", float64(q.Flagged), "count")
	add("quality.max_motion", q.MaxMotion, "1")
	add("quality.max_drift_c", q.MaxDriftC, "°C")
	add("quality.min_snr", q.MinSNR, "1")
	add("quality.suspected_wraps", float64(q.Wraps), "count")
	add("quality.invalidated_voxel_frames", float64(q.Invalid), "count")
	return ms
}

// metricKey turns a structure name into a metric name part: lower case,
// runs of anything but letters and digits become one underscore.
func metricKey(s string) string {
	var b strings.Builder
	under := false
	for _, r := range strings.ToLower(s) {
		if (r >= 'a' && r <= 'z') || (r >= '0' && r <= '9') {
			b.WriteRune(r)
			under = false
		} else if !under && b.Len() > 0 {
			b.WriteByte('_')
			under = true
		}
	}
	k := strings.TrimSuffix(b.String(), "_")
	if k == "" {
		k = "unnamed"
	}
	return k
}

// MetricsDocument is the JSON metrics file.
type MetricsDocument struct {
	Schema        string          `json:"schema"`
	SchemaVersion int             `json:"schema_version"`
	Software      string          `json:"software"`
	Case          string          `json:"case"`
	Deidentified  bool            `json:"deidentified"`
	ScanDate      string          `json:"scan_date,omitempty"`
	ReviewDate    string          `json:"review_date,omitempty"` // RFC 3339, UTC
	Reviewer      string          `json:"reviewer,omitempty"`
	SignOff       string          `json:"sign_off,omitempty"`
	SignOffNote   string          `json:"sign_off_comment,omitempty"`
	InputsSHA256  string          `json:"inputs_sha256,omitempty"`
	DoseUnit      string          `json:"dose_unit"`
	Settings      []Setting       `json:"settings"`
	Metrics       []Metric        `json:"metrics"`
	DVH           []jsonPoint     `json:"target_dvh"`
	Coverage      []jsonPoint     `json:"coverage_vs_threshold"`
	QualityNotes  []string        `json:"quality_notes"`
	Analysis      json.RawMessage `json:"analysis,omitempty"` // the analysis' own JSON, verbatim
	Cautions      []string        `json:"cautions"`
}

// jsonPoint is a CurvePoint without NaN (JSON has none): a missing band is
// left out.
type jsonPoint struct {
	X    float64  `json:"x"`
	Y    float64  `json:"y"`
	Low  *float64 `json:"low,omitempty"`
	High *float64 `json:"high,omitempty"`
}

// MarshalJSON writes a Setting as {"name": ..., "value": ...}.
func (s Setting) MarshalJSON() ([]byte, error) {
	return json.Marshal(struct {
		Name  string `json:"name"`
		Value string `json:"value"`
	}{s.Name, s.Value})
}

func curve(pts []CurvePoint) []jsonPoint {
	out := make([]jsonPoint, 0, len(pts))
	for _, p := range pts {
		if math.IsNaN(p.X) || math.IsNaN(p.Y) || math.IsInf(p.X, 0) {
			continue
		}
		q := jsonPoint{X: p.X, Y: p.Y}
		if !math.IsNaN(p.Low) && !math.IsNaN(p.High) {
			lo, hi := p.Low, p.High
			q.Low, q.High = &lo, &hi
		}
		out = append(out, q)
	}
	return out
}

// Document returns the metrics document of in.
func (in *Input) Document() *MetricsDocument {
	d := &MetricsDocument{
		Schema: SchemaName, SchemaVersion: SchemaVersion,
		Software: in.Software, Case: in.CaseLabel, Deidentified: in.Deidentified,
		ScanDate: in.ScanDate, Reviewer: in.Reviewer, SignOff: in.SignOff, SignOffNote: in.SignOffComment,
		InputsSHA256: in.InputsSHA256, DoseUnit: doseUnit(in),
		Settings: append([]Setting{}, in.Methods...),
		Metrics:  in.Metrics(),
		DVH:      curve(in.DVH), Coverage: curve(in.CoverageVsThreshold),
		QualityNotes: append([]string{}, in.Quality.Notes...),
		Analysis:     in.Analysis,
		Cautions:     in.cautions(),
	}
	if !in.ReviewDate.IsZero() {
		d.ReviewDate = in.ReviewDate.UTC().Format(time.RFC3339)
	}
	return d
}

func (in *Input) cautions() []string {
	if len(in.Cautions) > 0 {
		return in.Cautions
	}
	return DefaultCautions
}

// WriteJSON writes the metrics document of in as indented JSON.
func WriteJSON(w io.Writer, in *Input) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(in.Document()); err != nil {
		return fmt.Errorf("report: encoding metrics JSON: %w", err)
	}
	return nil
}

// WriteCSV writes the metrics of in as CSV (RFC 4180): a header
// "name,value,unit", then a row "schema_version,N," and one row per metric
// in the order of Metrics. Values use the shortest decimal form that reads
// back to the same float64, so CSV and JSON agree exactly.
func WriteCSV(w io.Writer, in *Input) error {
	cw := csv.NewWriter(w)
	rows := [][]string{{"name", "value", "unit"}, {"schema_version", strconv.Itoa(SchemaVersion), ""}}
	for _, m := range in.Metrics() {
		rows = append(rows, []string{m.Name, strconv.FormatFloat(m.Value, 'g', -1, 64), m.Unit})
	}
	if err := cw.WriteAll(rows); err != nil {
		return fmt.Errorf("report: writing metrics CSV: %w", err)
	}
	return nil
}

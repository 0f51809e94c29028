package audit

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"
)

// Analyzer analyses one case. It reads only below c.Dir, honours ctx (an
// interrupted audit cancels it) and returns the case's figures, or an error
// naming the file and the problem. An error made with Incomplete marks a
// case that lacks what the analysis needs (no thermometry, no contours); any
// other error marks a failed case. Run calls an Analyzer from several
// goroutines at once and recovers from a panic in it.
type Analyzer func(ctx context.Context, c *Case) (*CaseResult, error)

// CaseResult is what an Analyzer returns for one case.
type CaseResult struct {
	Metrics Metrics
	// Flags are short quality remarks ("motion sonication 3", "drift"),
	// listed in the summary.
	Flags []string
	// Analysis is the full analysis as JSON; it is stored in the case's
	// record. May be nil.
	Analysis json.RawMessage
	// Artifacts are further files for the case folder (the one-page report).
	Artifacts []Artifact
}

// Artifact is one file an Analyzer produces for a case. Run writes it
// atomically into the case's output folder.
type Artifact struct {
	Name  string                  // file name, e.g. "report.png"; no path separators
	Write func(w io.Writer) error // writes the file's contents
}

// Metrics are the figures of one case that go into the summary table.
// Volumes are in mL, fractions in percent of the target volume. NaN means
// "not computed" and is written as null in JSON and as an empty cell in CSV.
type Metrics struct {
	TargetML    Num `json:"target_ml"`
	CoveragePct Num `json:"coverage_pct"` // monitored target volume at or above the lethal threshold
	// CoverageOfTargetPct is the covered part of the whole target (the part
	// not monitored counts as not covered).
	CoverageOfTargetPct Num `json:"coverage_of_target_pct"`
	CoverageP05Pct      Num `json:"coverage_p05_pct"`  // 5th percentile of coverage under thermometry noise
	CoverageP95Pct      Num `json:"coverage_p95_pct"`  // 95th percentile
	NotMonitoredPct     Num `json:"not_monitored_pct"` // target volume without valid thermometry
	Holes               int `json:"holes"`             // connected unlethal regions inside the target
	LargestHoleML       Num `json:"largest_hole_ml"`
	OutsideMarginML     Num `json:"outside_margin_ml"` // lethal volume outside target plus margin
	AvoidLethalML       Num `json:"avoid_lethal_ml"`   // lethal volume inside avoid structures
}

// UnmarshalJSON reads Metrics. Records written before "not measurable"
// had its own value hold a coverage of 0 for a target with no monitored
// part (not_monitored_pct exactly 100); they read as NaN (not measurable)
// like the records written since.
func (m *Metrics) UnmarshalJSON(b []byte) error {
	type plain Metrics
	var p plain
	if err := json.Unmarshal(b, &p); err != nil {
		return err
	}
	if p.NotMonitoredPct == 100 && p.CoveragePct == 0 {
		p.CoveragePct = Num(math.NaN())
	}
	*m = Metrics(p)
	return nil
}

// NoMetrics returns Metrics with every figure NaN (not computed).
func NoMetrics() Metrics {
	n := Num(math.NaN())
	return Metrics{n, n, n, n, n, n, 0, n, n, n}
}

// Num is a float64 that is written as JSON null when NaN or infinite.
type Num float64

// MarshalJSON writes null for NaN and infinities, else the shortest decimal.
func (x Num) MarshalJSON() ([]byte, error) {
	f := float64(x)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

// UnmarshalJSON reads a number, or null as NaN.
func (x *Num) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*x = Num(math.NaN())
		return nil
	}
	f, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return fmt.Errorf("number %s: %w", b, err)
	}
	*x = Num(f)
	return nil
}

// cell formats x for CSV: empty when NaN, else rounded to 4 decimals
// (0.1 µL for volumes in mL, 0.0001 percentage points) without trailing
// zeros.
func (x Num) cell() string {
	f := float64(x)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return ""
	}
	s := strconv.FormatFloat(f, 'f', 4, 64)
	s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	if s == "-0" {
		s = "0"
	}
	return s
}

// IncompleteError marks a case that lacks inputs the analysis needs.
type IncompleteError struct{ Reason string }

// Error returns "incomplete case: " and the reason.
func (e *IncompleteError) Error() string { return "incomplete case: " + e.Reason }

// Incomplete returns an error marking an incomplete case (missing
// thermometry, missing contours...). The reason should name what is missing.
func Incomplete(reason string) error { return &IncompleteError{Reason: reason} }

// Status is the outcome of one case.
type Status string

// The outcomes of a case.
const (
	StatusOK         Status = "ok"         // analysed
	StatusIncomplete Status = "incomplete" // lacks thermometry, contours or another input
	StatusFailed     Status = "failed"     // could not be read or analysed
)

// RecordFile is the name of the per-case record in the case's output folder.
const RecordFile = "case.json"

// Record is the per-case JSON file OUT_DIR/cases/ID/case.json. It is
// written last, after the case's artifacts, so its presence marks a finished
// case.
type Record struct {
	Case         string          `json:"case"`             // ID
	Source       string          `json:"source,omitempty"` // Name; left out when de-identified
	Status       Status          `json:"status"`
	Reason       string          `json:"reason,omitempty"`
	InputSHA256  string          `json:"input_sha256"`
	Files        int             `json:"files"`
	Bytes        int64           `json:"bytes"`
	SettingsHash string          `json:"settings_sha256"`
	Settings     json.RawMessage `json:"settings"`
	Deidentified bool            `json:"deidentified"`
	Version      string          `json:"dosecover_version"`
	AnalysedUTC  time.Time       `json:"analysed_utc"`
	Seconds      float64         `json:"seconds"`
	Metrics      Metrics         `json:"metrics"`
	Flags        []string        `json:"quality_flags"`
	Artifacts    []string        `json:"artifacts"`
	Analysis     json.RawMessage `json:"analysis,omitempty"`
	Caution      string          `json:"caution"`

	dir string // folder the record was read from
	// analysisSchema is the schema_version of Analysis as read (0 when the
	// record holds no analysis).
	analysisSchema int
}

// Caution is written into every record and onto the summary figure.
const Caution = "For retrospective review, QA and teaching only; not a planning or treatment system. " +
	"Lethal thresholds vary by tissue; defer to local protocols and licensed practice."

func classify(err error) (Status, string) {
	var inc *IncompleteError
	if errors.As(err, &inc) {
		return StatusIncomplete, inc.Reason
	}
	return StatusFailed, err.Error()
}

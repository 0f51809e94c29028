package report

import (
	"encoding/json"
	"image"
	"math"
	"time"

	"dosecover/review/view"
)

// Input is everything the one-page report shows, as plain values. Fill it
// with FromResult or by hand; Render, RenderPNG and RenderPDF only read it.
//
// Fractions are in [0, 1]; NaN marks a value that was not computed (it is
// printed as "n/a" and left out of the metrics).
type Input struct {
	Title        string    // page title; empty: "Thermal dose coverage review"
	CaseLabel    string    // case or de-identified label
	Deidentified bool      // identity hidden: CaseLabel is already a neutral label
	ScanDate     string    // date of the treatment images as shown (YYYY-MM-DD), "" when unknown or hidden
	ReviewDate   time.Time // when the review was made
	Reviewer     string    // who reviewed; "" when not given
	SignOff      string    // sign-off state in words (see review.SignOffState.Line); "" when not signed off
	// SignOffComment is the comment of the sign-off that applies to this
	// analysis ("" when none applies or it has no comment).
	SignOffComment string

	Facts Facts

	// Panels are the three image panels, left to right: the plane through
	// the largest target cross-section, through the largest hole, through
	// the largest lethal cluster outside the margin (or the next most
	// informative plane).
	Panels []Panel

	// Wash is the dose colour scale of the panels, shown in their legend;
	// nil: no colour bar.
	Wash *Wash

	DVH                 []CurvePoint // cumulative DVH of the target: X dose, Y fraction of volume >= X
	CoverageVsThreshold []CurvePoint // X threshold, Y covered fraction; Low/High the uncertainty band (NaN if none)

	Sonications []SonicationRow
	Quality     Quality

	Methods      []Setting // dose model and parameters, PRF alpha, B0, TE, drift correction, baseline frames...
	InputsSHA256 string    // hex SHA-256 over the input files (see HashFiles)
	Software     string    // e.g. "dosecover 0.1.0"
	Cautions     []string  // printed verbatim at the foot of the page; empty: DefaultCautions

	// Analysis is the analysis' own JSON document, embedded verbatim in the
	// metrics JSON under "analysis"; nil leaves it out.
	Analysis json.RawMessage
}

// Facts are the coverage figures of the report.
type Facts struct {
	Model      string  // dose model name, e.g. "CEM43"
	DoseUnit   string  // unit of dose and threshold, e.g. "CEM43 min"
	Threshold  float64 // lethal threshold in DoseUnit
	MarginMM   float64 // safety margin around the target, mm
	TargetName string  // name of the target structure

	TargetVolumeML  float64 // target volume, mL
	Covered         float64 // fraction of the monitored target at or above the threshold
	CoveredLow      float64 // lower end of the uncertainty band of Covered (NaN if none)
	CoveredHigh     float64 // upper end of the uncertainty band of Covered (NaN if none)
	BandLabel       string  // what the band is, e.g. "5th-95th percentile, 200 trials"
	CoveredOfTarget float64 // fraction of the whole target covered (not monitored counts as not covered)
	NotMonitored    float64 // fraction of the target volume without valid thermometry
	LethalML        float64 // total lethal volume, mL

	D98, D50, D2 float64 // near-minimum, median, near-maximum target dose (ICRU Report 83), DoseUnit

	Holes []Region // connected regions of the target below the threshold, largest first

	Outside         []Region // lethal clusters outside the target plus margin, largest first (DepthMM: farthest beyond the target surface)
	OutsideMarginML float64  // total lethal volume outside the margin, mL

	Avoid []AvoidRow // lethal volume in each avoid structure
	// AsMeasured, when not nil, holds the figures without the residual
	// heat correction: the facts above then count the estimated heat left
	// from earlier sonications (carry_over).
	AsMeasured *AsMeasuredFacts
}

// AsMeasuredFacts are the coverage figures of the dose as measured.
type AsMeasuredFacts struct {
	Covered         float64 // fraction of the monitored target
	CoveredOfTarget float64 // fraction of the whole target
	OutsideMarginML float64 // lethal volume outside the margin, mL
}

// Region is one connected region (a hole or a lethal cluster).
type Region struct {
	VolumeML float64 // mL
	DepthMM  float64 // hole: largest distance from the hole to its rim; cluster: farthest reach beyond the target surface; NaN if unknown
}

// AvoidRow is the lethal dose landing in one avoid structure.
type AvoidRow struct {
	Name     string
	LethalML float64 // mL at or above the threshold
	MaxDose  float64 // maximum dose in the structure, DoseUnit (NaN if unknown)
}

// Panel is one image panel with its heading and caption.
type Panel struct {
	Title   string      // heading above the image
	Caption string      // line below the image (plane position, what it shows)
	Image   image.Image // rendered plane with overlays, scale bar and orientation letters; nil: "no image"

	plane view.Plane // the plane drawn (zero when not drawn); Panels sets it
}

// Wash is the logarithmic dose colour scale of the image panels (see
// review/view.DoseScale): transparent below Floor, top colour from Ceiling.
type Wash struct {
	Floor, Ceiling float64 // in the dose unit
	Lethal         float64 // lethal threshold marked on the colour bar; 0: none
}

// CurvePoint is one point of a curve with an optional band.
type CurvePoint struct {
	X, Y      float64
	Low, High float64 // band around Y (NaN when there is none)
}

// SonicationRow is one line of the per-sonication table.
type SonicationRow struct {
	Number        int
	Label         string
	Frames        int
	PeakC         float64 // hottest valid voxel temperature, °C (NaN if none)
	PeakDose      float64 // highest dose of this sonication alone, dose unit (NaN if none)
	LethalML      float64 // lethal volume added by this sonication (in delivery order), mL
	AddedCoverage float64 // covered fraction of the monitored target it added
	OutsideML     float64 // lethal volume outside the margin it added, mL
	Flagged       int     // frames flagged by the quality checks
	DriftFlagged  bool    // its removed drift exceeds Quality.DriftFlagC
	Excluded      bool    // left out of the cumulative dose by the reviewer
	CoolingS      float64 // time since the previous sonication's last frame, s (NaN first or unknown)
	ResidualC     float64 // estimated heat left from earlier sonications at the baseline, largest over target and margin, °C (NaN unknown)
}

// Quality summarises the thermometry quality over all sonications.
type Quality struct {
	Frames    int     // frames analysed
	Flagged   int     // frames flagged
	MaxMotion float64 // largest frame motion index, 1 − correlation of the magnitude with the baseline (NaN if not measured)
	MaxDriftC float64 // NaN if not measured
	MinSNR    float64 // NaN if not measured
	Wraps     int     // suspected phase wraps, summed over frames
	Invalid   int     // voxel-frames invalidated (low signal, wraps), summed
	Notes     []string
	// DriftFlagged lists the sonications whose removed drift exceeds
	// DriftFlagC °C.
	DriftFlagged []int
	DriftFlagC   float64
}

// Setting is one named line of the methods block.
type Setting struct {
	Name, Value string
}

// DefaultCautions are printed on every report unless Input.Cautions is set.
var DefaultCautions = []string{
	"For retrospective review, quality assurance and teaching only. Not a treatment planning or treatment delivery system; must not guide a treatment.",
	"Lethal thresholds are literature values that vary by tissue. Thermometry artefacts (motion, drift, susceptibility, fat, low signal) make dose maps wrong.",
	"Defer to local protocols and licensed clinical practice.",
}

// nan is a short name for math.NaN().
func nan() float64 { return math.NaN() }

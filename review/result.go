package review

import (
	"encoding/json"
	"io"
	"math"

	"dosecover/dosemap"
)

// SchemaVersion is the version of the JSON layout of Result. It changes
// whenever a field is renamed, removed or changes meaning. Version 2: the
// settings in snake_case throughout, with the thermometry inside. Version
// 3: covered_fraction (and as_measured's) is null, not 0, when no part of
// the target is monitored, coverage_vs_threshold is then empty, and
// study_uid names the study analysed. Version 4: every other fraction of
// a monitored volume is null, not 0, when that volume is empty: dvh.target
// and dvh.margin_shell, coverage_vs_threshold[].covered_fraction (the
// thresholds are listed), sonications[].added_coverage and
// cumulative_coverage, avoid[].monitored_fraction.
const SchemaVersion = 4

// Cautions are written into every result and report.
var Cautions = []string{
	"For retrospective review, quality assurance and teaching only; not a treatment planning or treatment delivery system.",
	"Lethal thresholds are literature values that vary by tissue; thermometry artefacts make dose maps wrong.",
	"Defer to local protocols and licensed clinical practice.",
}

// Result is the outcome of one coverage analysis. Positions are patient
// millimetres [x, y, z] (DICOM LPS); volumes in mL or mm³ as named;
// dose in the unit of the model (CEM43 minutes, or the Arrhenius damage
// integral Ω); fractions 0..1; sonications and slices numbered from 1.
// Values that could not be measured are nil (JSON null).
type Result struct {
	SchemaVersion   int    `json:"schema_version"`
	SoftwareVersion string `json:"software_version"`
	Case            string `json:"case"`
	Target          string `json:"target"` // name of the target structure
	// StudyUID is the StudyInstanceUID of the study analysed ("" when the
	// files did not say).
	StudyUID       string   `json:"study_uid"`
	Model          string   `json:"model"`
	DoseUnit       string   `json:"dose_unit"`
	Threshold      float64  `json:"threshold"`       // lethal dose used, in DoseUnit
	ThresholdCEM43 *float64 `json:"threshold_cem43"` // Threshold when the model is CEM43, else null
	MarginMM       float64  `json:"margin_mm"`
	Settings       Settings `json:"settings"`
	Grid           GridInfo `json:"analysis_grid"`
	// Thermometry summarises the PRF thermometry options used.
	Thermometry ThermometryInfo `json:"thermometry"`

	Coverage

	Holes                 []Hole      `json:"holes"` // largest first
	LethalVolumeML        float64     `json:"lethal_volume_ml"`
	OutsideMarginLethalML float64     `json:"outside_margin_lethal_ml"`
	OutsideClusters       []Cluster   `json:"outside_clusters"` // largest first
	Avoid                 []AvoidDose `json:"avoid"`

	DVH                 DVH                 `json:"dvh"`
	CoverageVsThreshold []ThresholdPoint    `json:"coverage_vs_threshold"`
	Sonications         []SonicationStats   `json:"sonications"`
	Quality             []SonicationQuality `json:"quality"`
	Warnings            []string            `json:"warnings"`
	Cautions            []string            `json:"cautions"`
	// CarryOver is true when the dose counts the estimated residual heat
	// of earlier sonications (Settings.CarryOver); AsMeasured then holds
	// the figures without it (null otherwise).
	CarryOver  bool        `json:"carry_over"`
	AsMeasured *AsMeasured `json:"as_measured"`

	// Monitoring is the monitoring rule's report: the negligible dose,
	// the strict and measured-planes figures, each sonication's reach.
	Monitoring *Monitoring `json:"monitoring"`

	// Grids for display (not written to JSON).
	Dose        *dosemap.Volume `json:"-"` // cumulative dose of the included sonications, thermometry grid; NaN unmeasured
	TargetMask  *dosemap.Volume `json:"-"` // fraction of each analysis voxel inside the target, analysis grid
	MarginMask  *dosemap.Volume `json:"-"` // 1 inside target+margin, analysis grid
	Lethal      *dosemap.Volume `json:"-"` // 1 lethal, 0 not, NaN unmeasured, analysis grid
	HoleLabels  *dosemap.Volume `json:"-"` // n > 0 in voxels of Holes[n-1], analysis grid
	SpillLabels *dosemap.Volume `json:"-"` // n > 0 in voxels of OutsideClusters[n-1], analysis grid
	Probability *dosemap.Volume `json:"-"` // probability of lethal dose (Monte Carlo), thermometry grid; nil without trials
}

// ThermometryInfo summarises the thermometry options of an analysis.
type ThermometryInfo struct {
	AlphaPPMPerC   float64  `json:"alpha_ppm_per_c"`
	B0T            *float64 `json:"b0_t"` // override; null: each series' own
	TES            *float64 `json:"te_s"` // override; null: each series' own
	BaselineFrames int      `json:"baseline_frames"`
	BodyTempC      float64  `json:"body_temp_c"`
	Drift          string   `json:"drift"`
	DriftOrder     int      `json:"drift_order"`
	Reference      string   `json:"reference"` // "automatic" or "given"
	MinMagnitude   float64  `json:"min_magnitude"`
	MaxMotion      float64  `json:"max_motion"`
}

// GridInfo describes the analysis grid.
type GridInfo struct {
	Size         [3]int           `json:"size"`       // columns, rows, slices
	SpacingMM    [3]float64       `json:"spacing_mm"` // along columns, rows, slices
	RefineSlices int              `json:"refine_slices"`
	SubSamples   int              `json:"sub_samples"`
	Connectivity int              `json:"connectivity"`
	Geometry     dosemap.Geometry `json:"-"`
}

// Coverage holds the target figures of a Result.
type Coverage struct {
	TargetVolumeML       float64 `json:"target_volume_ml"`
	MonitoredVolumeML    float64 `json:"monitored_volume_ml"` // part of the target with a measured dose
	MonitoredFraction    float64 `json:"monitored_fraction"`
	NotMonitoredML       float64 `json:"not_monitored_ml"`
	NotMonitoredFraction float64 `json:"not_monitored_fraction"`
	CoveredVolumeML      float64 `json:"covered_volume_ml"`
	// CoveredFraction is the covered part of the monitored target, nil
	// (JSON null, "not measurable") when no part of the target is
	// monitored: a coverage of nothing is not 0 %.
	// CoveredFractionOfTarget is the covered part of the whole target (the
	// unmonitored part counts as not covered).
	CoveredFraction         *float64 `json:"covered_fraction"`
	CoveredFractionOfTarget float64  `json:"covered_fraction_of_target"`
	CoveredFractionP05      *float64 `json:"covered_fraction_p05"` // Monte Carlo 5th percentile; null without trials
	CoveredFractionP95      *float64 `json:"covered_fraction_p95"`
	Trials                  int      `json:"trials"`
	// D98, D50, D2: dose received by at least 98, 50, 2 % of the monitored
	// target (near-minimum, median, near-maximum; ICRU Report 83, 2010).
	D98 *float64 `json:"d98"`
	D50 *float64 `json:"d50"`
	D2  *float64 `json:"d2"`
}

// Hole is a connected part of the monitored target below the threshold.
// Every analysis voxel with any part inside the target belongs to it when
// its dose is measured and below the threshold (its volume counted by the
// part inside), so the covered volume plus the holes make up the monitored
// target. TouchesSurface is true when the hole includes a voxel the target
// surface passes through.
type Hole struct {
	VolumeMM3          float64    `json:"volume_mm3"`
	FractionTarget     float64    `json:"fraction_of_target"`
	CentroidMM         [3]float64 `json:"centroid_mm"`
	CentroidSlice      int        `json:"centroid_slice"` // thermometry slice (1-based) nearest the centroid; 0 outside
	DepthMM            float64    `json:"depth_mm"`       // largest distance from a hole voxel centre to the nearest voxel centre outside the hole
	TouchesSurface     bool       `json:"touches_surface"`
	TouchesUnmonitored bool       `json:"touches_not_monitored"`
	Slices             []int      `json:"slices"` // thermometry slices (1-based) it spans
	MaxDose            float64    `json:"max_dose"`
	// MeanProbability is the mean Monte Carlo probability of lethal dose
	// over the hole; Certainty "certain" when it is at most 0.05,
	// "uncertain" otherwise, "" without trials.
	MeanProbability *float64 `json:"mean_lethal_probability"`
	Certainty       string   `json:"certainty"`

	id int // component label during analysis
}

func (h Hole) label() int { return h.id }

// Cluster is a connected lethal region outside target+margin.
type Cluster struct {
	VolumeMM3       float64    `json:"volume_mm3"`
	CentroidMM      [3]float64 `json:"centroid_mm"`
	CentroidSlice   int        `json:"centroid_slice"`
	Slices          []int      `json:"slices"`
	MaxDistanceMM   float64    `json:"max_distance_mm"` // largest distance beyond the target surface
	PeakDose        float64    `json:"peak_dose"`
	Sonication      int        `json:"sonication"`       // sonication contributing most dose to the cluster
	SonicationShare float64    `json:"sonication_share"` // its part of the dose summed over the cluster

	id int
}

func (c Cluster) label() int { return c.id }

// AvoidDose is the dose inside one avoid structure.
type AvoidDose struct {
	Name              string      `json:"name"`
	VolumeML          float64     `json:"volume_ml"`          // within the analysis grid
	MonitoredFraction *float64    `json:"monitored_fraction"` // null when none of it lies in the analysis grid
	LethalVolumeMM3   float64     `json:"lethal_volume_mm3"`
	PeakDose          *float64    `json:"peak_dose"`
	PeakMM            *[3]float64 `json:"peak_mm"`
}

// DVH is the cumulative dose-volume histogram: for each dose level the
// fraction of the volume receiving at least that dose (ICRU Report 83).
// Fractions are of the monitored part of each volume; a curve is nil
// (JSON null, "not measurable") when that part is empty.
type DVH struct {
	Dose        []float64 `json:"dose"`
	Target      []float64 `json:"target"`
	MarginShell []float64 `json:"margin_shell"` // margin minus target
}

// ThresholdPoint is the covered fraction (of the monitored target) for one
// alternative threshold; nil (JSON null) when no part of the target is
// monitored.
type ThresholdPoint struct {
	Threshold       float64  `json:"threshold"`
	CoveredFraction *float64 `json:"covered_fraction"`
}

// SonicationStats summarises one sonication. Added quantities are counted
// in delivery order: a voxel is credited to the first included sonication
// after which the cumulative dose reaches the threshold.
type SonicationStats struct {
	Number   int    `json:"number"`
	Label    string `json:"label"`
	Excluded bool   `json:"excluded"`
	// PeakTempC is the hottest valid voxel of any frame; Peak3x3C the
	// highest in-plane 3×3 mean around the hottest voxel of a frame
	// (common practice); TimeAbove43S the time the hottest voxel spent at
	// or above 43 °C. Null for dose-map sonications.
	PeakTempC          *float64    `json:"peak_temp_c"`
	Peak3x3C           *float64    `json:"peak_3x3_c"`
	PeakMM             *[3]float64 `json:"peak_mm"`
	TimeAbove43S       *float64    `json:"time_above_43_s"`
	PeakDose           float64     `json:"peak_dose"`
	LethalAddedML      float64     `json:"lethal_added_ml"`
	AddedCoverage      *float64    `json:"added_coverage"`      // of the monitored target; null when no part of it is monitored
	CumulativeCoverage *float64    `json:"cumulative_coverage"` // after this sonication; null likewise
	OutsideAddedML     float64     `json:"outside_margin_added_ml"`
	// ResidualRiseC is the largest estimated rise left from the earlier
	// sonications at this one's baseline over the target and margin, °C,
	// which the thermometry does not see (0 for the first; null when
	// unknown). CoolingS is the time from the previous sonication's last
	// frame to this one's first, s (null for the first or when unknown).
	ResidualRiseC *float64 `json:"residual_rise_c"`
	CoolingS      *float64 `json:"cooling_s"`
}

// AsMeasured holds the coverage figures of the dose as the thermometry
// measured it, beside a result corrected for residual heat
// (Settings.CarryOver).
type AsMeasured struct {
	CoveredFraction         *float64 `json:"covered_fraction"` // null when no part of the target is monitored
	CoveredFractionOfTarget float64  `json:"covered_fraction_of_target"`
	OutsideMarginLethalML   float64  `json:"outside_margin_lethal_ml"`
}

// SonicationQuality is the thermometry quality of one sonication.
type SonicationQuality struct {
	Sonication    int            `json:"sonication"`
	Frames        []FrameQuality `json:"frames"`
	FlaggedFrames []int          `json:"flagged_frames"` // 1-based
	MaxMotion     float64        `json:"max_motion"`     // largest FrameQuality.Motion
	MaxDriftC     float64        `json:"max_drift_c"`
	MinSNR        *float64       `json:"min_snr"`
	Wraps         int            `json:"suspected_wraps"`
	Invalid       int            `json:"invalidated_voxels"` // summed over frames
}

// FrameQuality is the quality of one thermometry frame as measured by the
// thermometry.
type FrameQuality struct {
	TimeS   float64  `json:"time_s"`
	Motion  float64  `json:"motion"`  // 1 − correlation of the magnitude image with the baseline magnitude
	DriftC  float64  `json:"drift_c"` // mean drift removed over the reference region
	SNR     *float64 `json:"snr"`     // mean magnitude SNR over valid voxels
	Wraps   int      `json:"suspected_wraps"`
	Invalid int      `json:"invalidated_voxels"`
	Flagged bool     `json:"flagged"`
	Note    string   `json:"note,omitempty"`
}

// WriteJSON writes r as indented JSON.
func (r *Result) WriteJSON(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(r)
}

// opt returns &x, or nil when x is NaN or infinite.
func opt(x float64) *float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return &x
}

// finite returns x, or 0 when x is NaN or infinite (for JSON).
func finite(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return x
}

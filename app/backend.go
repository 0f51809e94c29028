//go:build cgo

package main

import (
	"context"
	"time"

	"dosecover/dosemap"
	"dosecover/review"
)

// The review window talks to the reader, the analysis and the plane
// renderer only through the small set of types and hooks in this file. The
// files gluing in the real packages (backend_*.go) fill the hooks from their
// init functions; a hook left nil means that part is missing from the build,
// and the window says so instead of showing anything made up.

// skippedFile is a file of the case folder that was not used, with the
// reader's reason.
type skippedFile struct {
	Path, Reason string
}

// loadedCase is a case folder as read: the case itself and what the reader
// has to say about the folder.
type loadedCase struct {
	Dir           string
	Case          *dosemap.Case
	Skipped       []skippedFile
	Problems      []string // warnings about the folder that did not stop the load
	Inventory     string   // the reader's plain-text inventory of the folder
	NotReviewable string   // why the folder cannot be reviewed; "" when it can
	MissingB0     bool     // some thermometry lacks MagneticFieldStrength
	MissingTE     bool     // some thermometry lacks EchoTime
	Demo          bool     // the built-in demo case, opened from the user cache
	Study         string   // StudyInstanceUID of the study read; "" when unknown
	// Studies lists the studies of a folder that holds several when none
	// was chosen (nothing was read; the window offers a chooser).
	Studies []studyChoice
}

// studyChoice is one study of a folder, for the chooser.
type studyChoice struct {
	UID, Label string // Label names patient, date, description and counts
}

// loadOptions are the reader's options the user can change.
type loadOptions struct {
	PhaseScale float64 // radians per stored unit; 0: from the files' tags
	Study      string  // StudyInstanceUID to read from a folder of several
}

// xy is one point of a curve.
type xy struct{ X, Y float64 }

// region is a connected region the analysis found (a hole in the target or a
// lethal cluster outside the margin).
type region struct {
	Label    string       // short name, e.g. "H1"
	VolumeML float64      // mL
	Centre   dosemap.Vec3 // centroid, patient mm
	MaxDose  float64      // highest dose inside, model unit
	Detail   string       // extra facts from the analysis (distance etc.)
}

// avoidDose is the lethal dose inside one avoid structure.
type avoidDose struct {
	Name     string
	VolumeML float64 // structure volume, mL
	LethalML float64 // lethal volume inside, mL
	MaxDose  float64
}

// sonicationRow is one line of the sonication table.
type sonicationRow struct {
	Number        int
	Label         string
	Start         time.Time // zero when unknown
	Offset        float64   // seconds from the first sonication's start
	Duration      float64   // seconds of thermometry
	PeakTemp      float64   // °C, highest temperature inside the target (NaN unknown)
	PeakDose      float64   // highest dose of this sonication alone, model unit
	DoseAddedML   float64   // mL of tissue newly above the threshold
	CoverageAdded float64   // fraction of the target newly covered
	OutsideML     float64   // mL of lethal dose it added outside the margin
	Flags         []string  // quality flags and notes, plain words
	Flagged       bool      // a flag (not only notes) was raised
	CoolingS      float64   // s since the previous sonication's last frame (NaN first or unknown)
	ResidualC     float64   // estimated heat left from earlier sonications at the baseline, °C (NaN unknown)
	ResidualHigh  bool      // ResidualC exceeds the warning level
}

// analysisResult is an analysis as the review window shows it: the result
// of package review itself (its figures, masks and JSON for exports) and
// what the window draws from it for its tables and views.
type analysisResult struct {
	*review.Result
	Unit           string            // dose unit as shown: "CEM43 min" or "Ω"
	HoleRows       []region          // the holes, as the hole table lists them
	SpillRows      []region          // the lethal clusters outside the margin, as listed
	AvoidRows      []avoidDose       // lethal dose in each avoid structure
	DVHPoints      []xy              // dose (unit) -> fraction of target receiving at least that dose
	CoveragePoints []xy              // threshold (unit) -> covered fraction
	SonRows        []sonicationRow   // the sonication table
	PeakTemp       *dosemap.Volume   // highest temperature of the included sonications, °C (nil unknown)
	SonicationDose []*dosemap.Volume // dose of each sonication (index = row), may hold nil
	NotMonitored3D *dosemap.Volume   // target voxels without valid thermometry (Result.NotMonitored)
	// Planned contours (nil: none).
	TargetStructure *dosemap.Structure
	AvoidStructures []*dosemap.Structure
}

// session is a case prepared for fast re-analysis: thermometry and dose of
// every sonication are computed once; Analyze only recombines them.
type session interface {
	Analyze(ctx context.Context, s review.Settings) (*analysisResult, error)
	// Probe returns the temperature history at patient position p.
	Probe(p dosemap.Vec3, s review.Settings) (*review.Probe, error)
	// PeakTemperature returns the highest temperature of every voxel over
	// the included sonications (°C, NaN where never valid), on the
	// thermometry grid; nil when the case has no temperatures.
	PeakTemperature(s review.Settings) (*dosemap.Volume, error)
}

// Hooks filled by the backend files.
var (
	// readCase loads a case folder.
	readCase func(ctx context.Context, dir string, opt loadOptions, progress func(done, total int)) (*loadedCase, error)
	// prepareCase computes thermometry and per-sonication dose.
	prepareCase func(ctx context.Context, c *loadedCase, s review.Settings, progress func(stage string, frac float64)) (session, error)
	// demoCaseDir returns the folder of the built-in demo case, writing it first when needed.
	demoCaseDir func() (string, error)
)

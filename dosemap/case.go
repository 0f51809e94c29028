package dosemap

import (
	"context"
	"time"
)

// Version is the version of dosecover. It is written into every report and
// metrics file; FyneApp.toml carries the same number.
const Version = "0.1.0"

// Contour is one closed planar polygon, vertices in patient mm (LPS). The
// closing edge from the last vertex back to the first is implied; a repeated
// closing vertex is allowed.
type Contour struct {
	Points []Vec3
}

// StructureRole says how the analysis uses a structure.
type StructureRole int

// Structure roles.
const (
	RoleOther  StructureRole = iota // listed, not analysed
	RoleTarget                      // the region that must receive a lethal dose
	RoleAvoid                       // a region where lethal dose must not land
)

// String returns "target", "avoid" or "other".
func (r StructureRole) String() string {
	switch r {
	case RoleTarget:
		return "target"
	case RoleAvoid:
		return "avoid"
	}
	return "other"
}

// Structure is a named region outlined by closed planar contours, from an
// RTSTRUCT ROI or from dosecover's own contour file.
//
// Several contours on one plane combine by the even-odd rule: a point is
// inside when it lies inside an odd number of them, so a contour drawn
// inside another cuts a hole and one inside a hole is an island.
type Structure struct {
	Number          int           // ROINumber, or a running number
	Name            string        // ROIName
	InterpretedType string        // RTROIInterpretedType as written (PTV, AVOIDANCE, ...)
	Role            StructureRole // how the analysis uses it
	FrameOfRef      string        // FrameOfReferenceUID the points refer to
	Contours        []Contour
}

// Sonication is the thermometry (or ready-made dose) of one sonication as
// read from the case: frames of phase and magnitude, or of temperature, or a
// single dose map.
//
// Every frame slice ([]float32) has Geometry.Len() values in the flat index
// order of Geometry.Index. Exactly one of Phase, Temperature or Dose is the
// primary data; Magnitude accompanies Phase when the scanner saved it.
// Phase and Magnitude may instead stay in the files: Source is then set and
// decodes them when asked (see Resident), so that an analysis of many
// sonications holds the frames of one at a time.
type Sonication struct {
	Number      int       // 1-based, in delivery order
	Label       string    // SeriesDescription or similar, for display
	SeriesUID   string    // SeriesInstanceUID of the primary series
	FrameOfRef  string    // FrameOfReferenceUID
	Geometry    Geometry  // grid of every frame
	Start       time.Time // acquisition time of the first frame; zero when unknown
	Times       []float64 // seconds from Start for each frame, increasing
	Phase       [][]float32
	Magnitude   [][]float32
	Temperature [][]float32 // absolute °C per frame (temperature-map series)
	Dose        []float32   // CEM43 minutes (dose-map series)
	B0          float64     // MagneticFieldStrength, tesla; 0 when the file lacks it
	TE          float64     // EchoTime, seconds; 0 when the file lacks it
	// Source, when not nil, supplies Phase and Magnitude, which are then
	// nil; Times has one value per frame.
	Source FrameSource
	// Stacks are the further stacks (planes of other orientations or
	// positions) measured during this sonication, each with its own
	// Geometry, Start, Times and frames; they carry the sonication's
	// Number and have no Stacks of their own. Empty when the sonication
	// was measured on one stack.
	Stacks []*Sonication
}

// FrameSource supplies the phase and magnitude frames of a sonication that
// are kept in their files rather than in memory. Its methods are safe for
// concurrent use.
type FrameSource interface {
	// ReadFrames decodes the phase frames and, when the sonication has
	// them, the magnitude frames (nil otherwise), one per time point on
	// the sonication's Geometry. Frames or slices that could not be read
	// are NaN and described in notes, one line each; err is set only when
	// ctx ends. The buffers may be reused: hand them back to ReleaseFrames
	// once done and do not use them after.
	ReadFrames(ctx context.Context) (phase, magnitude [][]float32, notes []string, err error)
	// ReleaseFrames takes back frames returned by ReadFrames.
	ReleaseFrames(phase, magnitude [][]float32)
}

// HasPhase reports whether s is PRF thermometry: phase frames in memory or
// in its Source.
func (s *Sonication) HasPhase() bool { return s.Phase != nil || s.Source != nil }

// Resident returns s with its phase and magnitude frames in memory: s
// itself when it holds them or has no Source, else a shallow copy whose
// frames come from s.Source. done must be called once the copy is no longer
// used (it hands the frames back); notes are the Source's notes on frames
// it could not read.
func (s *Sonication) Resident(ctx context.Context) (r *Sonication, notes []string, done func(), err error) {
	if s.Source == nil || s.Phase != nil {
		return s, nil, func() {}, nil
	}
	ph, mag, notes, err := s.Source.ReadFrames(ctx)
	if err != nil {
		return nil, nil, nil, err
	}
	c := *s
	c.Phase, c.Magnitude, c.Source = ph, mag, nil
	src := s.Source
	return &c, notes, func() { src.ReleaseFrames(ph, mag) }, nil
}

// Frames returns the number of time frames of s (1 for a dose map).
func (s *Sonication) Frames() int {
	switch {
	case s.Phase != nil:
		return len(s.Phase)
	case s.Source != nil:
		return len(s.Times)
	case s.Temperature != nil:
		return len(s.Temperature)
	case s.Dose != nil:
		return 1
	}
	return 0
}

// Patient carries the identifying attributes of a case, kept apart so that a
// de-identified display or export can leave them out.
type Patient struct {
	Name        string
	ID          string
	BirthDate   string
	StudyDate   string // YYYYMMDD
	Institution string
}

// Case is everything dosecover reviews for one treatment session.
type Case struct {
	Label                     string        // short display label (de-identified where needed)
	Patient                   Patient       // identity; empty in de-identified cases
	Anatomy                   *Volume       // anatomy image in stored units after rescale; nil when absent
	WindowCenter, WindowWidth float64       // display window for Anatomy; 0 width when the files have none
	FrameOfRef                string        // FrameOfReferenceUID of the anatomy
	StudyUID                  string        // StudyInstanceUID of the study read; "" when unknown
	Sonications               []*Sonication // in delivery order
	Structures                []Structure
}

// Target returns the first structure with RoleTarget, or nil.
func (c *Case) Target() *Structure {
	for n := range c.Structures {
		if c.Structures[n].Role == RoleTarget {
			return &c.Structures[n]
		}
	}
	return nil
}

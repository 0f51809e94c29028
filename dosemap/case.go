package dosemap

import "time"

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
}

// Frames returns the number of time frames of s (1 for a dose map).
func (s *Sonication) Frames() int {
	switch {
	case s.Phase != nil:
		return len(s.Phase)
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

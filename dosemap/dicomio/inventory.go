package dicomio

import (
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"time"

	"dosecover/dosemap"
)

// Role is what a series is used for, decided from its attributes only.
type Role int

// Series roles.
const (
	RoleOther          Role = iota // listed, not used
	RoleAnatomy                    // MR or CT images that are not thermometry
	RolePhase                      // thermometry phase frames
	RoleMagnitude                  // thermometry magnitude frames
	RolePhaseMagnitude             // thermometry with phase and magnitude in one series
	RoleTemperatureMap             // absolute temperature maps (RWV units "Cel")
	RoleDoseMap                    // thermal dose maps (RWV LUTLabel "CEM43")
	RoleStructureSet               // RTSTRUCT contours
)

var roleNames = [...]string{"other", "anatomy", "phase", "magnitude", "phase+magnitude", "temperature map", "dose map", "structure set"}

// String returns the role's name as shown in the inventory.
func (r Role) String() string {
	if r < 0 || int(r) >= len(roleNames) {
		return fmt.Sprintf("Role(%d)", int(r))
	}
	return roleNames[r]
}

// MarshalText writes the role's name (used by encoding/json).
func (r Role) MarshalText() ([]byte, error) { return []byte(r.String()), nil }

// UnmarshalText reads a role's name.
func (r *Role) UnmarshalText(b []byte) error {
	for n, s := range roleNames {
		if s == string(b) {
			*r = Role(n)
			return nil
		}
	}
	return fmt.Errorf("unknown series role %q", b)
}

// SeriesInfo describes one series of the case folder.
type SeriesInfo struct {
	UID         string           `json:"uid"`
	Number      int              `json:"number"`
	Description string           `json:"description"`
	Modality    string           `json:"modality"`
	Role        Role             `json:"role"`
	Default     bool             `json:"default,omitempty"` // the anatomy series a Load uses
	Files       int              `json:"files"`
	Frames      int              `json:"frames"`
	TimePoints  int              `json:"timePoints"`
	Geometry    dosemap.Geometry `json:"geometry"`
	FrameOfRef  string           `json:"frameOfReference"`
	B0          float64          `json:"b0Tesla"`         // 0 when the files lack it
	TE          float64          `json:"echoTimeSeconds"` // 0 when the files lack it
	Start       time.Time        `json:"start"`           // zero when the files give no date
	StartClock  string           `json:"startClock"`      // time of day as written
	Duration    float64          `json:"durationSeconds"` // first to last frame
	Note        string           `json:"note,omitempty"`  // why the role was chosen, or what is wrong
	Paths       []string         `json:"-"`
}

// SonicationInfo describes one sonication found in the case.
type SonicationInfo struct {
	Number     int       `json:"number"`
	Kind       string    `json:"kind"` // "phase+magnitude", "phase", "temperature", "dose"
	Label      string    `json:"label"`
	Series     []string  `json:"series"` // SeriesInstanceUIDs used
	Frames     int       `json:"frames"`
	Slices     int       `json:"slices"`
	Start      time.Time `json:"start"`
	StartClock string    `json:"startClock"`
	Duration   float64   `json:"durationSeconds"`
	B0         float64   `json:"b0Tesla"`
	TE         float64   `json:"echoTimeSeconds"`
	// Stacks lists the stacks (planes) of a sonication measured on
	// several; empty for a sonication of one stack.
	Stacks []StackInfo `json:"stacks,omitempty"`
}

// StructureInfo describes one ROI of a structure set.
type StructureInfo struct {
	Number          int            `json:"number"`
	Name            string         `json:"name"`
	InterpretedType string         `json:"interpretedType"`
	Role            string         `json:"role"`
	Contours        int            `json:"closedPlanarContours"`
	Planes          int            `json:"planes"`
	Ignored         map[string]int `json:"ignoredContours,omitempty"` // contour type -> count
	FrameOfRef      string         `json:"frameOfReference"`
	File            string         `json:"file"`
}

// SkippedFile is a file that was not used, with the reason.
type SkippedFile struct {
	Path   string `json:"path"`
	Reason string `json:"reason"`
}

// Inventory is what a case folder holds, for a person to check before
// reviewing: the series and their roles, the sonications, the structures,
// the files that were skipped and every problem found.
type Inventory struct {
	Dir           string           `json:"dir"`
	Files         int              `json:"files"`
	Studies       []StudyInfo      `json:"studies"`         // every study of the folder
	Study         string           `json:"study,omitempty"` // StudyInstanceUID of the study read; "" when none
	Series        []SeriesInfo     `json:"series"`
	Sonications   []SonicationInfo `json:"sonications"`
	Structures    []StructureInfo  `json:"structures"`
	Skipped       []SkippedFile    `json:"skipped"`
	Problems      []string         `json:"problems"`
	Reviewable    bool             `json:"reviewable"`
	NotReviewable string           `json:"notReviewable,omitempty"` // why not, when Reviewable is false
}

func (inv *Inventory) problem(format string, a ...any) {
	inv.Problems = append(inv.Problems, fmt.Sprintf(format, a...))
}

// orientationName names the plane of g: axial, coronal, sagittal or oblique.
func orientationName(g dosemap.Geometry) string {
	n := g.Normal
	ax := 0
	for i := 1; i < 3; i++ {
		if math.Abs(n[i]) > math.Abs(n[ax]) {
			ax = i
		}
	}
	name := [...]string{"sagittal", "coronal", "axial"}[ax]
	if math.Abs(n[ax]) < 0.999 {
		name = "oblique (near " + name + ")"
	}
	return name
}

// WriteText writes the inventory for a person to read.
func (inv *Inventory) WriteText(w io.Writer) error {
	var b strings.Builder
	fmt.Fprintf(&b, "Case folder: %s\n", inv.Dir)
	fmt.Fprintf(&b, "Files: %d read, %d skipped\n", inv.Files-len(inv.Skipped), len(inv.Skipped))
	if inv.Reviewable {
		fmt.Fprintf(&b, "Reviewable: yes\n")
	} else {
		fmt.Fprintf(&b, "Reviewable: NO - %s\n", inv.NotReviewable)
	}
	if len(inv.Studies) > 0 {
		fmt.Fprintf(&b, "\nStudies (%d):\n", len(inv.Studies))
	}
	for _, s := range inv.Studies {
		used := ""
		if s.Used {
			used = " [used]"
		}
		desc := s.Description
		if desc == "" {
			desc = "(no description)"
		}
		date := "date unknown"
		if s.Date != "" {
			date = studyDateText(s.Date)
		}
		fmt.Fprintf(&b, "  %s - %s%s\n", date, desc, used)
		fmt.Fprintf(&b, "      patient ID %s, name %s\n", orNone(s.PatientID), orNone(s.PatientName))
		fmt.Fprintf(&b, "      %d series, %d files, in %s\n", s.Series, s.Files, s.Folder)
		fmt.Fprintf(&b, "      uid %s\n", s.UID)
	}
	if inv.NeedsStudyChoice() {
		fmt.Fprintf(&b, "  Several studies: choose one with --study UID.\n")
	}
	fmt.Fprintf(&b, "\nSeries (%d):\n", len(inv.Series))
	for _, s := range inv.Series {
		def := ""
		if s.Default {
			def = " [used]"
		}
		desc := s.Description
		if desc == "" {
			desc = "(no description)"
		}
		fmt.Fprintf(&b, "  #%d %s - %s%s\n", s.Number, desc, s.Role, def)
		fmt.Fprintf(&b, "      modality %s, %d files, %d frames", s.Modality, s.Files, s.Frames)
		if s.TimePoints > 0 {
			fmt.Fprintf(&b, ", %d time points", s.TimePoints)
		}
		b.WriteString("\n")
		if s.Geometry.Cols > 0 {
			fmt.Fprintf(&b, "      geometry %s, %s\n", s.Geometry, orientationName(s.Geometry))
		}
		if s.StartClock != "" {
			when := s.StartClock
			if !s.Start.IsZero() {
				when = s.Start.Format("2006-01-02 15:04:05")
			}
			fmt.Fprintf(&b, "      start %s, duration %.1f s\n", when, s.Duration)
		}
		if s.Role == RolePhase || s.Role == RoleMagnitude || s.Role == RolePhaseMagnitude {
			fmt.Fprintf(&b, "      B0 %s, TE %s\n", fieldText(s.B0, "T", 1), fieldText(s.TE*1000, "ms", 1))
		} else if s.B0 > 0 || s.TE > 0 {
			fmt.Fprintf(&b, "      B0 %s, TE %s\n", fieldText(s.B0, "T", 1), fieldText(s.TE*1000, "ms", 1))
		}
		if s.Note != "" {
			fmt.Fprintf(&b, "      note: %s\n", s.Note)
		}
		fmt.Fprintf(&b, "      uid %s\n", s.UID)
	}
	fmt.Fprintf(&b, "\nSonications (%d):\n", len(inv.Sonications))
	for _, s := range inv.Sonications {
		when := s.StartClock
		if !s.Start.IsZero() {
			when = s.Start.Format("2006-01-02 15:04:05")
		}
		if when == "" {
			when = "time unknown"
		}
		fmt.Fprintf(&b, "  %d. %s (%s): %d frames x %d slices, start %s, %.1f s",
			s.Number, s.Label, s.Kind, s.Frames, s.Slices, when, s.Duration)
		if s.Kind == "phase" || s.Kind == "phase+magnitude" {
			fmt.Fprintf(&b, ", B0 %s, TE %s", fieldText(s.B0, "T", 1), fieldText(s.TE*1000, "ms", 1))
		}
		b.WriteString("\n")
		for n, st := range s.Stacks {
			id := ""
			if st.StackID != "" {
				id = fmt.Sprintf(", StackID %q", st.StackID)
			}
			fmt.Fprintf(&b, "      stack %d: %s, %d slices, %d frames, centre (%.1f, %.1f, %.1f) mm, series %q%s\n",
				n+1, st.Orientation, st.Slices, st.Frames, st.Center[0], st.Center[1], st.Center[2], st.Description, id)
		}
	}
	fmt.Fprintf(&b, "\nStructures (%d):\n", len(inv.Structures))
	for _, s := range inv.Structures {
		it := s.InterpretedType
		if it == "" {
			it = "no type"
		}
		fmt.Fprintf(&b, "  %d %q (%s) -> %s: %d closed contours on %d planes", s.Number, s.Name, it, s.Role, s.Contours, s.Planes)
		if len(s.Ignored) > 0 {
			keys := make([]string, 0, len(s.Ignored))
			for k := range s.Ignored {
				keys = append(keys, k)
			}
			sort.Strings(keys)
			var parts []string
			for _, k := range keys {
				parts = append(parts, fmt.Sprintf("%d %s", s.Ignored[k], k))
			}
			fmt.Fprintf(&b, "; ignored %s", strings.Join(parts, ", "))
		}
		b.WriteString("\n")
	}
	if len(inv.Skipped) > 0 {
		fmt.Fprintf(&b, "\nSkipped files (%d):\n", len(inv.Skipped))
		for _, s := range inv.Skipped {
			fmt.Fprintf(&b, "  %s: %s\n", s.Path, s.Reason)
		}
	}
	if len(inv.Problems) > 0 {
		fmt.Fprintf(&b, "\nProblems (%d):\n", len(inv.Problems))
		for _, p := range inv.Problems {
			fmt.Fprintf(&b, "  - %s\n", p)
		}
	} else {
		fmt.Fprintf(&b, "\nProblems: none found\n")
	}
	_, err := io.WriteString(w, b.String())
	return err
}

func fieldText(v float64, unit string, prec int) string {
	if v == 0 {
		return "MISSING"
	}
	if unit == "ms" {
		prec = 2
	}
	return fmt.Sprintf("%.*f %s", prec, v, unit)
}

package review

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"dosecover/dosemap"
	"dosecover/dosemap/safefile"
)

// ContourFormat is the value of the "format" field of a dosecover contour
// file; ContourVersion the newest version this build reads.
const (
	ContourFormat  = "dosecover-contours"
	ContourVersion = 1
)

// ContourFile is dosecover's own contour file (JSON), for cases without an
// RTSTRUCT and for contours edited in the review window:
//
//	{
//	  "format": "dosecover-contours",
//	  "version": 1,
//	  "frame_of_reference": "1.2.826.0.1.3680043.2.1125.1",
//	  "structures": [
//	    {"name": "target", "role": "target", "number": 1,
//	     "contours": [[[x, y, z], [x, y, z], [x, y, z], ...], ...]}
//	  ]
//	}
//
// Points are patient millimetres (DICOM LPS); each contour is a closed
// planar polygon (closing edge implied); role is "target", "avoid" or
// "other".
type ContourFile struct {
	Format     string          `json:"format"`
	Version    int             `json:"version"`
	FrameOfRef string          `json:"frame_of_reference,omitempty"`
	Comment    string          `json:"comment,omitempty"`
	Structures []ContourRecord `json:"structures"`
}

// ContourRecord is one structure of a ContourFile.
type ContourRecord struct {
	Name            string         `json:"name"`
	Role            string         `json:"role"`
	Number          int            `json:"number,omitempty"`
	InterpretedType string         `json:"interpreted_type,omitempty"`
	Contours        [][][3]float64 `json:"contours"`
}

// ReadContours decodes a contour file from r. name is used in error
// messages (the file path).
func ReadContours(r io.Reader, name string) ([]dosemap.Structure, string, error) {
	var f ContourFile
	dec := json.NewDecoder(r)
	dec.DisallowUnknownFields()
	if err := dec.Decode(&f); err != nil {
		return nil, "", fmt.Errorf("reading contours %s: %s", name, jsonProblem(err))
	}
	if f.Format != ContourFormat {
		return nil, "", fmt.Errorf("reading contours %s: format %q is not %q", name, f.Format, ContourFormat)
	}
	if f.Version < 1 || f.Version > ContourVersion {
		return nil, "", fmt.Errorf("reading contours %s: version %d not supported (this build reads 1..%d)", name, f.Version, ContourVersion)
	}
	var out []dosemap.Structure
	targets := 0
	for n, rec := range f.Structures {
		where := fmt.Sprintf("reading contours %s: structure %d (%q)", name, n+1, rec.Name)
		if strings.TrimSpace(rec.Name) == "" {
			return nil, "", fmt.Errorf("%s: no name", where)
		}
		s := dosemap.Structure{Number: rec.Number, Name: rec.Name, InterpretedType: rec.InterpretedType, FrameOfRef: f.FrameOfRef}
		if s.Number == 0 {
			s.Number = n + 1
		}
		switch rec.Role {
		case "target":
			s.Role = dosemap.RoleTarget
			targets++
		case "avoid":
			s.Role = dosemap.RoleAvoid
		case "other", "":
			s.Role = dosemap.RoleOther
		default:
			return nil, "", fmt.Errorf("%s: role %q is not target, avoid or other", where, rec.Role)
		}
		for c, pts := range rec.Contours {
			if len(pts) < 3 {
				return nil, "", fmt.Errorf("%s: contour %d has %d points; a closed contour needs 3 or more", where, c+1, len(pts))
			}
			ct := dosemap.Contour{Points: make([]dosemap.Vec3, len(pts))}
			for p, xyz := range pts {
				for _, x := range xyz {
					if math.IsNaN(x) || math.IsInf(x, 0) || math.Abs(x) > 1e5 {
						return nil, "", fmt.Errorf("%s: contour %d point %d %v is not a position in mm", where, c+1, p+1, xyz)
					}
				}
				ct.Points[p] = dosemap.Vec3(xyz)
			}
			s.Contours = append(s.Contours, ct)
		}
		if len(s.Contours) == 0 {
			return nil, "", fmt.Errorf("%s: no contours", where)
		}
		if _, err := newPlaneSolid(&s, 1); err != nil {
			return nil, "", fmt.Errorf("%s: %w", where, err)
		}
		out = append(out, s)
	}
	if len(out) == 0 {
		return nil, "", fmt.Errorf("reading contours %s: no structures", name)
	}
	if targets > 1 {
		return nil, "", fmt.Errorf("reading contours %s: %d structures have role target; mark exactly one", name, targets)
	}
	return out, f.FrameOfRef, nil
}

// ReadContourFile reads a contour file. It returns the structures and the
// frame of reference they refer to.
func ReadContourFile(path string) ([]dosemap.Structure, string, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, "", &safefile.PathError{What: "contour file", Path: path, Err: err}
	}
	defer f.Close()
	return ReadContours(f, path)
}

// WriteOutside writes a file at path with write, atomically: into a
// temporary file in the same folder, synced, then renamed over path, so a
// reader never sees half a file. It refuses when path lies in or below
// caseDir (after resolving symbolic links), the folder a case was read
// from, which dosecover never modifies; caseDir "" skips the check. A nil
// write only checks the location and writes nothing.
func WriteOutside(path, caseDir string, write func(io.Writer) error) error {
	if caseDir != "" {
		inside, err := safefile.Within(caseDir, path)
		if err != nil {
			return err
		}
		if inside {
			return fmt.Errorf("the file would lie inside the case folder %s, which dosecover does not modify; choose another folder", caseDir)
		}
	}
	if err := safefile.CheckDir("output folder", filepath.Dir(path)); err != nil {
		return err
	}
	if write == nil {
		return nil
	}
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+"-*.tmp")
	if err != nil {
		return &safefile.PathError{What: "output folder", Path: filepath.Dir(path), Err: err}
	}
	defer os.Remove(tmp.Name())
	if err := write(tmp); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	return os.Rename(tmp.Name(), path)
}

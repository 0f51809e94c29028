package review

import (
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"dosecover/dosemap"
)

func TestContourFileRoundTrip(t *testing.T) {
	dir := t.TempDir()
	caseDir := filepath.Join(dir, "case")
	if err := os.Mkdir(caseDir, 0o755); err != nil {
		t.Fatal(err)
	}
	in := []dosemap.Structure{
		sphereStructure("target", dosemap.Vec3{1, 2, 3}, 5, 1.5, 0, 16, dosemap.RoleTarget),
		sphereStructure("nerve", dosemap.Vec3{20, 2, 3}, 2, 1.5, 0, 8, dosemap.RoleAvoid),
	}
	for n := range in {
		in[n].Number = n + 1
		in[n].FrameOfRef = "1.2.3"
	}
	path := filepath.Join(dir, "edited.json")
	if err := writeContourFile(path, caseDir, in, "1.2.3"); err != nil {
		t.Fatal(err)
	}
	out, fr, err := ReadContourFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if fr != "1.2.3" || !reflect.DeepEqual(in, out) {
		t.Errorf("round trip differs:\n%+v\n%+v", in[0].Name, out)
	}
	// Never inside the case folder, also through a link to it.
	if err := writeContourFile(filepath.Join(caseDir, "sub", "x.json"), caseDir, in, ""); err == nil || !strings.Contains(err.Error(), "inside the case folder") {
		t.Errorf("write inside case folder: %v", err)
	}
	link := filepath.Join(dir, "link")
	if os.Symlink(caseDir, link) == nil {
		if err := writeContourFile(filepath.Join(link, "x.json"), caseDir, in, ""); err == nil {
			t.Error("write through a link into the case folder succeeded")
		}
	}
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		if strings.HasSuffix(e.Name(), ".tmp") {
			t.Errorf("temporary file left behind: %s", e.Name())
		}
	}
}

func TestReadContoursErrors(t *testing.T) {
	for _, tc := range []struct{ name, json, want string }{
		{"not json", `{`, "the file ends before the JSON is complete"},
		{"format", `{"format":"x","version":1,"structures":[]}`, "format"},
		{"version", `{"format":"dosecover-contours","version":9,"structures":[]}`, "version 9"},
		{"empty", `{"format":"dosecover-contours","version":1,"structures":[]}`, "no structures"},
		{"role", `{"format":"dosecover-contours","version":1,"structures":[{"name":"a","role":"x","contours":[[[0,0,0],[1,0,0],[0,1,0]]]}]}`, "role"},
		{"short", `{"format":"dosecover-contours","version":1,"structures":[{"name":"a","role":"target","contours":[[[0,0,0],[1,0,0]]]}]}`, "2 points"},
		{"no name", `{"format":"dosecover-contours","version":1,"structures":[{"name":"","role":"target","contours":[[[0,0,0],[1,0,0],[0,1,0]]]}]}`, "no name"},
		{"two targets", `{"format":"dosecover-contours","version":1,"structures":[{"name":"a","role":"target","contours":[[[0,0,0],[1,0,0],[0,1,0]]]},{"name":"b","role":"target","contours":[[[0,0,0],[1,0,0],[0,1,0]]]}]}`, "exactly one"},
		{"unknown field", `{"format":"dosecover-contours","version":1,"colour":"x","structures":[]}`, "unknown field"},
		{"not planar", `{"format":"dosecover-contours","version":1,"structures":[{"name":"a","role":"target","contours":[[[0,0,0],[10,0,0],[10,10,5],[0,10,0]]]}]}`, "not planar"},
	} {
		_, _, err := ReadContours(strings.NewReader(tc.json), "f.json")
		if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), "f.json") {
			t.Errorf("%s: %v, want %q and the file name", tc.name, err, tc.want)
		}
	}
}

// encodeContours writes structures as a contour file to w (the product
// reads contour files; tests write them).
func encodeContours(w io.Writer, structures []dosemap.Structure, frameOfRef string) error {
	f := ContourFile{Format: ContourFormat, Version: ContourVersion, FrameOfRef: frameOfRef,
		Comment: "positions in mm, DICOM patient coordinates (LPS)", Structures: []ContourRecord{}}
	for _, s := range structures {
		rec := ContourRecord{Name: s.Name, Role: s.Role.String(), Number: s.Number, InterpretedType: s.InterpretedType, Contours: [][][3]float64{}}
		for _, c := range s.Contours {
			pts := make([][3]float64, len(c.Points))
			for p, q := range c.Points {
				pts[p] = [3]float64(q)
			}
			rec.Contours = append(rec.Contours, pts)
		}
		f.Structures = append(f.Structures, rec)
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", " ")
	return enc.Encode(&f)
}

// writeContourFile writes structures to path atomically (see
// WriteOutside); it never writes inside caseDir, the folder the case was
// read from (pass "" when there is none).
func writeContourFile(path, caseDir string, structures []dosemap.Structure, frameOfRef string) error {
	err := WriteOutside(path, caseDir, func(w io.Writer) error { return encodeContours(w, structures, frameOfRef) })
	if err != nil {
		return fmt.Errorf("writing contours %s: %w", path, err)
	}
	return nil
}

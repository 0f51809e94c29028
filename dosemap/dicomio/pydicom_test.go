package dicomio

import (
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/testkit"
)

// Every .dcm of the pydicom test folder either reads or is reported with a
// reason; none may panic (readBytes recovers the library's panics; a panic
// here would be one of ours and fails the test run).
func TestPydicomFolderEveryFile(t *testing.T) {
	dir := testkit.PydicomTestFiles(t)
	paths, _ := filepath.Glob(filepath.Join(dir, "*.dcm"))
	if len(paths) < 20 {
		t.Fatalf("only %d .dcm files in %s", len(paths), dir)
	}
	for _, p := range paths {
		for _, pixels := range []bool{false, true} {
			fi, err := readFile(p, pixels)
			if err != nil {
				var fe *fileError
				if !asFileError(err, &fe) || len(fe.Reason) < 10 {
					t.Errorf("%s: reason %q is not a clear message", filepath.Base(p), err)
				}
				continue
			}
			if pixels && fi.IsImage {
				// Decode every frame: must not panic.
				dst := make([]float32, fi.Rows*fi.Cols)
				for n := range fi.Frames {
					fi.decodeFrame(n, dst, 1, 0, nil)
				}
			}
		}
	}
	inv, err := Scan(t.Context(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	if inv.Files < len(paths) {
		t.Errorf("Scan saw %d files, the folder has at least %d", inv.Files, len(paths))
	}
	for _, s := range inv.Skipped {
		if s.Reason == "" {
			t.Errorf("%s skipped without reason", s.Path)
		}
	}
	// Files in compressed syntaxes are named as such (pydicom's README lists
	// the syntaxes of these files).
	for name, want := range map[string]string{
		"MR_small_RLE.dcm":              "RLE Lossless",
		"MR_small_jpeg_ls_lossless.dcm": "JPEG-LS Lossless",
		"MR_small_jp2klossless.dcm":     "JPEG 2000",
		"SC_rgb_jpeg_gdcm.dcm":          "JPEG Lossless",
		"MR_truncated.dcm":              "truncated",
	} {
		found := false
		for _, s := range inv.Skipped {
			if s.Path == name {
				found = true
				if !strings.Contains(s.Reason, want) {
					t.Errorf("%s: reason %q, want it to name %q", name, s.Reason, want)
				}
			}
		}
		if !found {
			t.Errorf("%s not listed as skipped", name)
		}
	}
}

func asFileError(err error, fe **fileError) bool {
	e, ok := err.(*fileError)
	*fe = e
	return ok
}

// MR_small.dcm and its re-encodings: values read with pydicom 2.3.1
// (testdata/check-values.md): 64×64 int16, PixelSpacing
// 0.3125, IPP (-83.9063, -91.2, 6.6406), axial; stored min 127, max 2145,
// sum 2125338, pixel[0,0] 905. Exact integer comparisons.
func TestPydicomMRSmall(t *testing.T) {
	for _, name := range []string{"MR_small.dcm", "MR_small_implicit.dcm", "MR_small_bigendian.dcm", "MR_small_expb.dcm"} {
		t.Run(name, func(t *testing.T) {
			fi, err := readFile(pydicomFile(t, name), true)
			if err != nil {
				t.Fatal(err)
			}
			if fi.Cols != 64 || fi.Rows != 64 || len(fi.Frames) != 1 {
				t.Fatalf("size %d×%d×%d", fi.Cols, fi.Rows, len(fi.Frames))
			}
			f := fi.Frames[0]
			if f.Spacing != [2]float64{0.3125, 0.3125} {
				t.Errorf("PixelSpacing %v", f.Spacing)
			}
			if f.IPP.Sub(dosemap.Vec3{-83.9063, -91.2, 6.6406}).Norm() > 1e-9 {
				t.Errorf("IPP %v", f.IPP)
			}
			if f.Row != (dosemap.Vec3{1, 0, 0}) || f.Col != (dosemap.Vec3{0, 1, 0}) {
				t.Errorf("orientation %v %v, want axial", f.Row, f.Col)
			}
			dst := make([]float32, 64*64)
			fi.decodeFrame(0, dst, 1, 0, nil)
			lo, hi, sum := math.Inf(1), math.Inf(-1), 0.0
			for _, v := range dst {
				lo, hi, sum = math.Min(lo, float64(v)), math.Max(hi, float64(v)), sum+float64(v)
			}
			if lo != 127 || hi != 2145 || sum != 2125338 || dst[0] != 905 {
				t.Errorf("min %g max %g sum %g [0,0] %g; want 127, 2145, 2125338, 905", lo, hi, sum, dst[0])
			}
			if math.Abs(fi.TE-0.240) > 1e-12 || fi.B0 != 0 {
				t.Errorf("TE %g s (want 0.240), B0 %g (want absent)", fi.TE, fi.B0)
			}
			// The same through Load, which reads the pixel bytes at the
			// offset found by the attribute pass (file linked, read in place).
			dir := t.TempDir()
			if err := os.Symlink(pydicomFile(t, name), filepath.Join(dir, "img")); err != nil {
				t.Skipf("symbolic links unavailable: %v", err)
			}
			c, _, err := Load(t.Context(), dir, LoadOptions{}, nil)
			if err != nil || c.Anatomy == nil {
				t.Fatalf("Load: %v", err)
			}
			sum = 0
			for _, v := range c.Anatomy.Data {
				sum += float64(v)
			}
			if sum != 2125338 || c.Anatomy.Data[0] != 905 {
				t.Errorf("Load: sum %g [0,0] %g; want 2125338, 905", sum, c.Anatomy.Data[0])
			}
		})
	}
}

// rtstruct.dcm (no preamble; pydicom 2.3.1): ROI "patient" with three
// CLOSED_PLANAR 400×300 mm rectangles at z = -200, -190, -180 mm; two POINT
// ROIs. Area by the shoelace formula A = ½|Σ(x_i y_{i+1} − x_{i+1} y_i)|,
// exact for a rectangle: 120000 mm² (tolerance 1e-6 relative, rounding only).
func TestPydicomRTStruct(t *testing.T) {
	data, err := os.ReadFile(pydicomFile(t, "rtstruct.dcm"))
	if err != nil {
		t.Fatal(err)
	}
	ss, info, err := ReadStructureSet("rtstruct.dcm", data)
	if err != nil {
		t.Fatal(err)
	}
	var patient *dosemap.Structure
	points := 0
	for n := range ss {
		if ss[n].Name == "patient" {
			patient = &ss[n]
		}
		if info[n].Ignored["POINT"] > 0 {
			points++
			if len(ss[n].Contours) != 0 {
				t.Errorf("POINT ROI %q has polygons", ss[n].Name)
			}
		}
	}
	if patient == nil || len(patient.Contours) != 3 {
		t.Fatalf("ROI patient: %+v", patient)
	}
	if points != 2 {
		t.Errorf("%d POINT ROIs, want 2", points)
	}
	for n, c := range patient.Contours {
		z := c.Points[0][2]
		if want := -200 + 10*float64(n); z != want {
			t.Errorf("contour %d at z=%g, want %g", n, z, want)
		}
		if a := shoelace(c.Points); math.Abs(a-120000) > 1e-6*120000 {
			t.Errorf("contour %d area %g mm², want 120000", n, a)
		}
	}
}

func shoelace(p []dosemap.Vec3) float64 {
	s := 0.0
	for i := range p {
		j := (i + 1) % len(p)
		s += p[i][0]*p[j][1] - p[j][0]*p[i][1]
	}
	return math.Abs(s) / 2
}

// MR_small and rtstruct.dcm come from different studies and frames of
// reference. Read together (MR_small through a symbolic link, so it is
// read in place) they are two studies and refused; with rtstruct.dcm
// rewritten by pydicom into MR_small's study they are one study whose
// positions must be reported as unrelated.
func TestPydicomFrameOfReferenceMismatch(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"MR_small.dcm", "rtstruct.dcm"} {
		if err := os.Symlink(pydicomFile(t, name), filepath.Join(dir, name)); err != nil {
			t.Skipf("symbolic links unavailable: %v", err)
		}
	}
	_, inv, err := Load(t.Context(), dir, LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !inv.NeedsStudyChoice() || len(inv.Studies) != 2 {
		t.Fatalf("two studies not refused: %+v %q", inv.Studies, inv.NotReviewable)
	}
	py := testkit.Python(t)
	rt := filepath.Join(dir, "rtstruct.dcm")
	os.Remove(rt)
	script := "import sys, pydicom\n" +
		"mr = pydicom.dcmread(sys.argv[1], stop_before_pixels=True)\n" +
		"rt = pydicom.dcmread(sys.argv[2], force=True)\n" +
		"rt.StudyInstanceUID = mr.StudyInstanceUID\n" +
		"rt.save_as(sys.argv[3], write_like_original=True)\n"
	if out, err := exec.Command(py, "-c", script, pydicomFile(t, "MR_small.dcm"), pydicomFile(t, "rtstruct.dcm"), rt).CombinedOutput(); err != nil {
		t.Fatalf("pydicom: %v\n%s", err, out)
	}
	c, inv, err := Load(t.Context(), dir, LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !hasProblem(inv, "frame of reference mismatch") {
		t.Errorf("no mismatch reported: %q", inv.Problems)
	}
	if inv.Reviewable {
		t.Errorf("anatomy and contours only: not reviewable")
	}
	if c.Anatomy == nil || c.Anatomy.Len() != 64*64 {
		t.Fatalf("anatomy %+v", c.Anatomy)
	}
	sum := 0.0
	for _, v := range c.Anatomy.Data {
		sum += float64(v)
	}
	// RescaleSlope/Intercept are absent in MR_small: stored values (sum as above).
	if sum != 2125338 {
		t.Errorf("anatomy sum %g, want 2125338", sum)
	}
}

package deid

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"dosecover/dosemap/dicomwrite"
	"dosecover/dosemap/testkit"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// Invented identifying values (no real person or place).
var identity = []string{
	"TESTPERSON", "INVENTED", "INV-0042-XZ", "19610203", "Nowhere Test Clinic",
	"Imaginary Lane 7", "DRFICTION", "OPERATORFAKE", "SCANROOM-Q",
}

func el(t testing.TB, tg tag.Tag, v any) *dicom.Element {
	t.Helper()
	e, err := dicom.NewElement(tg, v)
	if err != nil {
		t.Fatalf("element %v: %v", tg, err)
	}
	return e
}

const (
	mrUID    = "1.2.826.0.1.3680043.99.1.1"
	seriesU  = "1.2.826.0.1.3680043.99.1.2"
	studyU   = "1.2.826.0.1.3680043.99.1.3"
	forUID   = "1.2.826.0.1.3680043.99.1.4"
	rtUID    = "1.2.826.0.1.3680043.99.1.5"
	mrClass  = "1.2.840.10008.5.1.4.1.1.4"
	rtClass  = "1.2.840.10008.5.1.4.1.1.481.3" // RT Structure Set Storage (PS3.4)
	explicit = "1.2.840.10008.1.2.1"
)

// header returns the file meta information and SOP Common elements of an
// invented instance: SOP class and instance, explicit VR little endian,
// and its Modality.
func header(t testing.TB, sopClass, sopInstance, modality string) []*dicom.Element {
	return []*dicom.Element{
		el(t, tag.MediaStorageSOPClassUID, []string{sopClass}),
		el(t, tag.MediaStorageSOPInstanceUID, []string{sopInstance}),
		el(t, tag.TransferSyntaxUID, []string{explicit}),
		el(t, tag.SOPClassUID, []string{sopClass}),
		el(t, tag.SOPInstanceUID, []string{sopInstance}),
		el(t, tag.Modality, []string{modality}),
	}
}

// patient returns the identifying patient and site elements shared by both files.
func patient(t testing.TB) []*dicom.Element {
	return []*dicom.Element{
		el(t, tag.PatientName, []string{"TESTPERSON^INVENTED"}),
		el(t, tag.PatientID, []string{"INV-0042-XZ"}),
		el(t, tag.PatientBirthDate, []string{"19610203"}),
		el(t, tag.PatientSex, []string{"O"}),
		el(t, tag.PatientAddress, []string{"Imaginary Lane 7"}),
		el(t, tag.InstitutionName, []string{"Nowhere Test Clinic"}),
		el(t, tag.ReferringPhysicianName, []string{"DRFICTION^A"}),
		el(t, tag.OperatorsName, []string{"OPERATORFAKE"}),
		el(t, tag.StationName, []string{"SCANROOM-Q"}),
		el(t, tag.StudyDate, []string{"20260314"}),
		el(t, tag.StudyTime, []string{"101500"}),
		el(t, tag.StudyInstanceUID, []string{studyU}),
		el(t, tag.StudyDescription, []string{"Phantom session for TESTPERSON"}),
		el(t, tag.AccessionNumber, []string{"ACC123"}),
	}
}

// writeMR writes a small invented MR image with identifying values, a
// private attribute and known pixel bytes.
func writeMR(t testing.TB, path string, pixels []byte) {
	t.Helper()
	es := append(header(t, mrClass, mrUID, "MR"),
		el(t, tag.SeriesInstanceUID, []string{seriesU}),
		el(t, tag.SeriesDescription, []string{"anatomy INVENTED"}),
		el(t, tag.FrameOfReferenceUID, []string{forUID}),
		el(t, tag.AcquisitionDate, []string{"20260314"}),
		el(t, tag.AcquisitionTime, []string{"101733.250"}),
		el(t, tag.AcquisitionDateTime, []string{"20260314101733.250000"}),
		el(t, tag.Rows, []int{2}),
		el(t, tag.Columns, []int{2}),
		el(t, tag.SamplesPerPixel, []int{1}),
		el(t, tag.BitsAllocated, []int{16}),
		el(t, tag.BitsStored, []int{16}),
		el(t, tag.HighBit, []int{15}),
		el(t, tag.PixelRepresentation, []int{1}),
		el(t, tag.PhotometricInterpretation, []string{"MONOCHROME2"}),
		el(t, tag.PixelData, dicom.PixelDataInfo{IntentionallyUnprocessed: true, UnprocessedValueData: pixels}),
		// A private creator and a private value holding the name.
		&dicom.Element{Tag: tag.Tag{Group: 0x0029, Element: 0x0010}, RawValueRepresentation: "LO", ValueRepresentation: tag.VRString, Value: mustValue(t, []string{"FICTIONAL VENDOR"})},
		&dicom.Element{Tag: tag.Tag{Group: 0x0029, Element: 0x1001}, RawValueRepresentation: "LO", ValueRepresentation: tag.VRString, Value: mustValue(t, []string{"TESTPERSON private"})},
	)
	writeDS(t, path, append(es, patient(t)...))
}

// writeRT writes an invented RT structure set referencing the MR image
// through ReferencedFrameOfReferenceSequence and ContourImageSequence.
func writeRT(t *testing.T, path string) {
	t.Helper()
	contourImage := [][]*dicom.Element{{
		el(t, tag.ReferencedSOPClassUID, []string{mrClass}),
		el(t, tag.ReferencedSOPInstanceUID, []string{mrUID}),
	}}
	series := [][]*dicom.Element{{
		el(t, tag.SeriesInstanceUID, []string{seriesU}),
		el(t, tag.ContourImageSequence, contourImage),
	}}
	study := [][]*dicom.Element{{
		el(t, tag.ReferencedSOPClassUID, []string{"1.2.840.10008.3.1.2.3.1"}),
		el(t, tag.ReferencedSOPInstanceUID, []string{studyU}),
		el(t, tag.RTReferencedSeriesSequence, series),
	}}
	refFOR := [][]*dicom.Element{{
		el(t, tag.FrameOfReferenceUID, []string{forUID}),
		el(t, tag.RTReferencedStudySequence, study),
	}}
	roi := [][]*dicom.Element{{
		el(t, tag.ROINumber, []string{"1"}),
		el(t, tag.ReferencedFrameOfReferenceUID, []string{forUID}),
		el(t, tag.ROIName, []string{"Target"}),
		el(t, tag.ROIDescription, []string{"drawn by DRFICTION"}),
	}}
	es := append(header(t, rtClass, rtUID, "RTSTRUCT"),
		el(t, tag.SeriesInstanceUID, []string{"1.2.826.0.1.3680043.99.1.6"}),
		el(t, tag.StructureSetLabel, []string{"plan of TESTPERSON"}),
		el(t, tag.StructureSetDate, []string{"20260313"}),
		el(t, tag.ReferencedFrameOfReferenceSequence, refFOR),
		el(t, tag.StructureSetROISequence, roi),
	)
	writeDS(t, path, append(es, patient(t)...))
}

func mustValue(t testing.TB, v any) dicom.Value {
	val, err := dicom.NewValue(v)
	if err != nil {
		t.Fatal(err)
	}
	return val
}

func writeDS(t testing.TB, path string, es []*dicom.Element) {
	t.Helper()
	dicomwrite.SortByTag(es)
	var buf bytes.Buffer
	if err := dicom.Write(&buf, dicom.Dataset{Elements: es}, dicom.SkipVRVerification()); err != nil {
		t.Fatalf("writing %s: %v", path, err)
	}
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

// find returns the first element with tag tg anywhere in es (walking
// sequences ourselves).
func find(es []*dicom.Element, tg tag.Tag) *dicom.Element {
	var got *dicom.Element
	walk(es, func(e *dicom.Element) {
		if got == nil && e.Tag == tg {
			got = e
		}
	})
	return got
}

func str(t *testing.T, es []*dicom.Element, tg tag.Tag) string {
	t.Helper()
	e := find(es, tg)
	if e == nil {
		return "<absent>"
	}
	return strings.Join(stringsOf(e), `\`)
}

func makeCase(t *testing.T) (dir string, pixels []byte) {
	dir = filepath.Join(t.TempDir(), "case TESTPERSON")
	if err := os.Mkdir(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	pixels = []byte{0x01, 0x02, 0xFE, 0xFF, 0x10, 0x80, 0x00, 0x7F}
	writeMR(t, filepath.Join(dir, "TESTPERSON_mr.dcm"), pixels)
	writeRT(t, filepath.Join(dir, "TESTPERSON_rt.dcm"))
	os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("TESTPERSON INVENTED"), 0o644)
	return dir, pixels
}

func TestFolderRemovesIdentity(t *testing.T) {
	src, pixels := makeCase(t)
	dst := filepath.Join(t.TempDir(), "out")
	res, err := Folder(context.Background(), src, dst, Options{Salt: "teaching-salt", ShiftDays: -100}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Files) != 2 || len(res.Skipped) != 1 {
		t.Fatalf("files %v skipped %v: want 2 DICOM files and notes.txt skipped", res.Files, res.Skipped)
	}
	// No byte of any output, nor any output name, holds an identifying value.
	ents, _ := os.ReadDir(dst)
	for _, e := range ents {
		b, _ := os.ReadFile(filepath.Join(dst, e.Name()))
		for _, id := range identity {
			for _, form := range []string{id, strings.ToUpper(id), strings.ToLower(id)} {
				if bytes.Contains(b, []byte(form)) || strings.Contains(e.Name(), form) {
					t.Errorf("%s contains %q", e.Name(), form)
				}
			}
		}
	}
	mr, err := dicom.ParseFile(res.Files[0].Dst, nil, dicom.SkipProcessingPixelDataValue())
	if err != nil {
		t.Fatal(err)
	}
	rt, err := dicom.ParseFile(res.Files[1].Dst, nil)
	if err != nil {
		t.Fatal(err)
	}
	// PS3.15 E.1.1: PatientIdentityRemoved YES and the method recorded.
	for _, ds := range []dicom.Dataset{mr, rt} {
		if got := str(t, ds.Elements, tag.PatientIdentityRemoved); got != "YES" {
			t.Errorf("PatientIdentityRemoved = %q, want YES", got)
		}
		if got := str(t, ds.Elements, tag.DeidentificationMethod); !strings.Contains(got, "Annex E") || !strings.Contains(got, "shifted") {
			t.Errorf("DeidentificationMethod = %q", got)
		}
		if got := str(t, ds.Elements, tag.PatientName); !regexp.MustCompile(`^TEACHING\^[0-9A-F]{8}$`).MatchString(got) {
			t.Errorf("PatientName = %q, want a TEACHING- label", got)
		}
		if str(t, ds.Elements, tag.PatientName) != str(t, mr.Elements, tag.PatientName) {
			t.Errorf("the two files of one patient got different labels")
		}
		for _, tg := range []tag.Tag{tag.InstitutionName, tag.StationName, tag.PatientAddress} {
			if e := find(ds.Elements, tg); e != nil {
				t.Errorf("%v still present: %v", tg, e.Value)
			}
		}
		for _, tg := range []tag.Tag{tag.PatientBirthDate, tag.ReferringPhysicianName, tag.OperatorsName, tag.AccessionNumber} {
			if got := str(t, ds.Elements, tg); got != "" {
				t.Errorf("%v = %q, want present and empty", tg, got)
			}
		}
		walk(ds.Elements, func(e *dicom.Element) {
			if tag.IsPrivate(e.Tag.Group) {
				t.Errorf("private attribute %v kept", e.Tag)
			}
		})
		// Dates shifted by -100 days: 2026-03-14 - 100 d = 2025-12-04 (computed).
		if got := str(t, ds.Elements, tag.StudyDate); got != "20251204" {
			t.Errorf("StudyDate = %q, want 20251204", got)
		}
		if got := str(t, ds.Elements, tag.StudyTime); got != "101500" {
			t.Errorf("StudyTime = %q, want it kept", got)
		}
	}
	if got := str(t, mr.Elements, tag.AcquisitionDateTime); got != "20251204101733.250000" {
		t.Errorf("AcquisitionDateTime = %q, want the date part shifted, the time kept", got)
	}
	if got := str(t, mr.Elements, tag.SeriesDescription); got != "anatomy XXXXXXXX" {
		t.Errorf("SeriesDescription = %q, want the name cleaned out", got)
	}
	if got := str(t, rt.Elements, tag.StructureSetDate); got != "20251203" {
		t.Errorf("StructureSetDate = %q, want 20251203", got)
	}
	if got := str(t, rt.Elements, tag.ROIName); got != "Target" {
		t.Errorf("ROIName = %q, want Target kept", got)
	}
	// UIDs replaced, references still hold.
	newMR := str(t, mr.Elements, tag.SOPInstanceUID)
	uidRE := regexp.MustCompile(`^2\.25\.(0|[1-9][0-9]*)$`) // PS3.5 9.1 and B.2
	for _, u := range []string{newMR, str(t, mr.Elements, tag.FrameOfReferenceUID), str(t, mr.Elements, tag.StudyInstanceUID)} {
		if !uidRE.MatchString(u) || len(u) > 64 {
			t.Errorf("UID %q is not a 2.25 UID of at most 64 characters", u)
		}
	}
	if newMR == mrUID {
		t.Error("SOPInstanceUID not replaced")
	}
	if got := str(t, mr.Elements, tag.MediaStorageSOPInstanceUID); got != newMR {
		t.Errorf("MediaStorageSOPInstanceUID %q != SOPInstanceUID %q", got, newMR)
	}
	if got := str(t, mr.Elements, tag.SOPClassUID); got != mrClass {
		t.Errorf("SOPClassUID = %q, want the standard class kept", got)
	}
	if got := str(t, rt.Elements, tag.ReferencedSOPInstanceUID); got != str(t, mr.Elements, tag.StudyInstanceUID) {
		// The first ReferencedSOPInstanceUID in walk order is the study reference.
		t.Errorf("RT study reference %q != MR StudyInstanceUID", got)
	}
	ci := find(rt.Elements, tag.ContourImageSequence)
	item := ci.Value.GetValue().([]*dicom.SequenceItemValue)[0].GetValue().([]*dicom.Element)
	if got := str(t, item, tag.ReferencedSOPInstanceUID); got != newMR {
		t.Errorf("ContourImageSequence ReferencedSOPInstanceUID = %q, want the MR's new UID %q", got, newMR)
	}
	if got := str(t, rt.Elements, tag.ReferencedFrameOfReferenceUID); got != str(t, mr.Elements, tag.FrameOfReferenceUID) {
		t.Errorf("ROI ReferencedFrameOfReferenceUID %q != MR FrameOfReferenceUID", got)
	}
	// Pixel data copied byte for byte.
	px := find(mr.Elements, tag.PixelData).Value.GetValue().(dicom.PixelDataInfo)
	if !bytes.Equal(px.UnprocessedValueData, pixels) {
		t.Errorf("pixel bytes % x, want % x", px.UnprocessedValueData, pixels)
	}
	// Same salt, same UIDs: a second run is reproducible.
	dst2 := filepath.Join(t.TempDir(), "again")
	res2, err := Folder(context.Background(), src, dst2, Options{Salt: "teaching-salt", ShiftDays: -100}, nil)
	if err != nil {
		t.Fatal(err)
	}
	a, _ := os.ReadFile(res.Files[1].Dst)
	b, _ := os.ReadFile(res2.Files[1].Dst)
	if !bytes.Equal(a, b) {
		t.Error("two runs with the same salt differ")
	}
}

func TestDatesRemove(t *testing.T) {
	src, _ := makeCase(t)
	dst := filepath.Join(t.TempDir(), "out")
	res, err := Folder(context.Background(), src, dst, Options{Salt: "s", Dates: DatesRemove}, nil)
	if err != nil {
		t.Fatal(err)
	}
	mr, err := dicom.ParseFile(res.Files[0].Dst, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, tg := range []tag.Tag{tag.StudyDate, tag.AcquisitionDate} {
		if got := str(t, mr.Elements, tg); got != DummyDate {
			t.Errorf("%v = %q, want %s", tg, got, DummyDate)
		}
	}
	if got := str(t, mr.Elements, tag.LongitudinalTemporalInformationModified); got != "REMOVED" {
		t.Errorf("LongitudinalTemporalInformationModified = %q, want REMOVED", got)
	}
	if got := str(t, mr.Elements, tag.DeidentificationMethod); !strings.Contains(got, DummyDate) {
		t.Errorf("DeidentificationMethod %q does not record the dummy date", got)
	}
}

func TestShiftFromSalt(t *testing.T) {
	seen := map[int]bool{}
	for _, s := range []string{"a", "b", "c", "d"} {
		d, err := New(Options{Salt: s})
		if err != nil {
			t.Fatal(err)
		}
		if n := d.ShiftDays(); n > -366 || n < -3650 {
			t.Errorf("salt %q: shift %d outside [-3650, -366]", s, n)
		}
		seen[d.ShiftDays()] = true
		d2, _ := New(Options{Salt: s})
		if d2.ShiftDays() != d.ShiftDays() || d2.UID("1.2.3") != d.UID("1.2.3") {
			t.Errorf("salt %q: not deterministic", s)
		}
	}
	if len(seen) < 2 {
		t.Error("every salt gave the same date offset")
	}
	r1, _ := New(Options{})
	r2, _ := New(Options{})
	if r1.UID("1.2.3") == r2.UID("1.2.3") {
		t.Error("two random salts gave the same UID")
	}
}

func TestFolderRefuses(t *testing.T) {
	src, _ := makeCase(t)
	ctx := context.Background()
	if _, err := Folder(ctx, src, filepath.Join(src, "out"), Options{}, nil); err == nil || !strings.Contains(err.Error(), "refusing") {
		t.Errorf("output inside the case folder: err = %v", err)
	}
	full := t.TempDir()
	os.WriteFile(filepath.Join(full, "x"), nil, 0o644)
	if _, err := Folder(ctx, src, full, Options{}, nil); err == nil || !strings.Contains(err.Error(), "not empty") {
		t.Errorf("non-empty output folder: err = %v", err)
	}
	if _, err := Folder(ctx, filepath.Join(src, "missing"), t.TempDir(), Options{}, nil); err == nil {
		t.Error("missing case folder accepted")
	}
	// The source is never modified.
	ents, _ := os.ReadDir(src)
	if len(ents) != 3 {
		t.Errorf("case folder now holds %d entries, want 3", len(ents))
	}
}

func TestBurnedInAnnotationRefused(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "a.dcm")
	writeDS(t, p, []*dicom.Element{
		el(t, tag.MediaStorageSOPClassUID, []string{mrClass}),
		el(t, tag.MediaStorageSOPInstanceUID, []string{mrUID}),
		el(t, tag.TransferSyntaxUID, []string{explicit}),
		el(t, tag.SOPInstanceUID, []string{mrUID}),
		el(t, tag.BurnedInAnnotation, []string{"YES"}),
	})
	d, _ := New(Options{})
	err := d.File(p, filepath.Join(dir, "b.dcm"))
	if err == nil || !strings.Contains(err.Error(), "burned-in") || !strings.Contains(err.Error(), p) {
		t.Errorf("err = %v, want a burned-in annotation refusal naming %s", err, p)
	}
}

// TestPydicomMRSmall de-identifies MR_small.dcm from pydicom's test files
// and checks the result with pydicom itself: the name is replaced, the
// identity-removed flag set and the pixels unchanged.
func TestPydicomMRSmall(t *testing.T) {
	py, dir := testkit.Python(t), testkit.PydicomTestFiles(t)
	src := filepath.Join(dir, "MR_small.dcm")
	dst := filepath.Join(t.TempDir(), "mr.dcm")
	d, err := New(Options{Salt: "pydicom"})
	if err != nil {
		t.Fatal(err)
	}
	if err := d.File(src, dst); err != nil {
		t.Fatal(err)
	}
	script := `
import sys, pydicom
a = pydicom.dcmread(sys.argv[1]); b = pydicom.dcmread(sys.argv[2])
assert str(b.PatientName) != str(a.PatientName), "PatientName kept"
assert str(b.PatientName).startswith("TEACHING^"), b.PatientName
assert b.PatientIdentityRemoved == "YES"
assert b.SOPInstanceUID != a.SOPInstanceUID and b.SOPInstanceUID.startswith("2.25.")
assert b.file_meta.MediaStorageSOPInstanceUID == b.SOPInstanceUID
assert b.SOPClassUID == a.SOPClassUID
assert (a.pixel_array == b.pixel_array).all(), "pixels differ"
assert b.pixel_array.sum() == 2125338, b.pixel_array.sum()  # testdata/check-values.md: MR_small sum read with pydicom
assert list(b.ImagePositionPatient) == list(a.ImagePositionPatient)
print("ok")
`
	out, err := exec.Command(py, "-c", script, src, dst).CombinedOutput()
	if err != nil || strings.TrimSpace(string(out)) != "ok" {
		t.Fatalf("pydicom check failed: %v\n%s", err, out)
	}
}

// TestDciodvfyMRSmall checks with dciodvfy (Debian dicom3tools) that the
// de-identified MR_small.dcm has no error the original did not have.
func TestDciodvfyMRSmall(t *testing.T) {
	dir := testkit.PydicomTestFiles(t)
	needDciodvfy(t)
	src := filepath.Join(dir, "MR_small.dcm")
	dst := filepath.Join(t.TempDir(), "mr.dcm")
	d, _ := New(Options{Salt: "v"})
	if err := d.File(src, dst); err != nil {
		t.Fatal(err)
	}
	before := errorsOf(src)
	for l := range errorsOf(dst) {
		if !before[l] {
			t.Errorf("new dciodvfy finding: %s", l)
		}
	}
}

// needDciodvfy skips the test when dciodvfy is missing, unless CI=true.
func needDciodvfy(t *testing.T) {
	t.Helper()
	if _, err := exec.LookPath("dciodvfy"); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatal("dciodvfy (Debian dicom3tools) is required in CI")
		}
		t.Skip("dciodvfy not found (install Debian dicom3tools)")
	}
}

// errorsOf returns the "Error" lines dciodvfy reports for the file at p.
func errorsOf(p string) map[string]bool {
	out, _ := exec.Command("dciodvfy", p).CombinedOutput() // exit status reflects findings
	m := map[string]bool{}
	for _, l := range strings.Split(string(out), "\n") {
		if strings.HasPrefix(l, "Error") {
			m[l] = true
		}
	}
	return m
}

// TestPydicomFiles de-identifies more of pydicom's test files (native and
// encapsulated pixel data, implicit VR, private sequences, an RT dose) and
// checks with pydicom that the stored pixel bytes (for compressed files:
// the bytes of every compressed frame) are unchanged, the
// patient name replaced and no private attribute left at any depth.
func TestPydicomFiles(t *testing.T) {
	py, dir := testkit.Python(t), testkit.PydicomTestFiles(t)
	for _, name := range []string{
		"CT_small.dcm",              // native 16-bit, explicit VR
		"MR_small_implicit.dcm",     // implicit VR little endian
		"MR_small_jp2klossless.dcm", // encapsulated JPEG 2000
		"MR_small_RLE.dcm",          // encapsulated RLE
		"nested_priv_SQ.dcm",        // private attributes inside sequences
		"rtdose.dcm",                // multi-frame RT dose
	} {
		t.Run(name, func(t *testing.T) {
			src := filepath.Join(dir, name)
			dst := filepath.Join(t.TempDir(), "out.dcm")
			d, _ := New(Options{Salt: "pydicom files"})
			if err := d.File(src, dst); err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			script := `
import sys, pydicom
a = pydicom.dcmread(sys.argv[1], force=True); b = pydicom.dcmread(sys.argv[2])
if "PixelData" in a:
    if a.file_meta.TransferSyntaxUID.is_compressed:
        # Compare the compressed frames: the Basic Offset Table of a
        # single-frame file may come back empty (PS3.5 A.4 allows it).
        from pydicom.encaps import generate_pixel_data_frame
        n = int(a.get("NumberOfFrames", 1))
        fa = list(generate_pixel_data_frame(a.PixelData, n))
        fb = list(generate_pixel_data_frame(b.PixelData, n))
        assert fa == fb, "compressed frames differ"
    else:
        assert a.PixelData == b.PixelData, "pixel bytes differ"
if "PatientName" in a and str(a.PatientName):
    assert str(b.PatientName).startswith("TEACHING^"), b.PatientName
assert b.PatientIdentityRemoved == "YES"
def walk(ds):
    for e in ds:
        assert not e.tag.is_private, e.tag
        if e.VR == "SQ":
            for it in e.value:
                walk(it)
walk(b)
print("ok")
`
			out, err := exec.Command(py, "-c", script, src, dst).CombinedOutput()
			if err != nil || strings.TrimSpace(string(out)) != "ok" {
				t.Fatalf("pydicom check of %s failed: %v\n%s", name, err, out)
			}
		})
	}
}

// A file that cannot be de-identified stops the run and leaves neither the
// output folder nor a temporary folder behind.
func TestFolderFailureLeavesNothing(t *testing.T) {
	src, _ := makeCase(t)
	writeDS(t, filepath.Join(src, "zz_burned.dcm"), []*dicom.Element{
		el(t, tag.MediaStorageSOPClassUID, []string{mrClass}),
		el(t, tag.MediaStorageSOPInstanceUID, []string{"1.2.826.0.1.3680043.99.1.9"}),
		el(t, tag.TransferSyntaxUID, []string{explicit}),
		el(t, tag.StudyInstanceUID, []string{studyU}),
		el(t, tag.BurnedInAnnotation, []string{"YES"}),
	})
	if err := os.Symlink(filepath.Join(src, "notes.txt"), filepath.Join(src, "link.txt")); err != nil {
		t.Fatal(err)
	}
	parent := t.TempDir()
	dst := filepath.Join(parent, "out")
	_, err := Folder(context.Background(), src, dst, Options{}, nil)
	if err == nil || !strings.Contains(err.Error(), "zz_burned.dcm") {
		t.Fatalf("err = %v, want a failure naming zz_burned.dcm", err)
	}
	if ents, _ := os.ReadDir(parent); len(ents) != 0 {
		t.Errorf("after a failed run %s holds %d entries, want none", parent, len(ents))
	}
	// Without the bad file the run succeeds, lists the link as skipped and
	// fills an existing empty folder.
	os.Remove(filepath.Join(src, "zz_burned.dcm"))
	os.Mkdir(dst, 0o755)
	res, err := Folder(context.Background(), src, dst, Options{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	var link bool
	for _, s := range res.Skipped {
		link = link || strings.Contains(s.Reason, "symbolic link")
	}
	if !link || len(res.Files) != 2 {
		t.Errorf("files %d, skipped %v: want 2 files and the link skipped", len(res.Files), res.Skipped)
	}
	for _, f := range res.Files {
		if _, err := os.Stat(f.Dst); err != nil {
			t.Errorf("listed output %s: %v", f.Dst, err)
		}
	}
	if ents, _ := os.ReadDir(parent); len(ents) != 1 {
		t.Errorf("%s holds %d entries, want only the output folder", parent, len(ents))
	}
}

// A folder of two studies (StudyInstanceUID (0020,000D), DICOM PS3.3
// C.7.2.1) is never copied under one label: refused with both studies
// named, or copied for the chosen study alone, the other listed.
func TestFolderTwoStudies(t *testing.T) {
	src, _ := makeCase(t)
	writeDS(t, filepath.Join(src, "other.dcm"), []*dicom.Element{
		el(t, tag.MediaStorageSOPClassUID, []string{mrClass}),
		el(t, tag.MediaStorageSOPInstanceUID, []string{"1.2.826.0.1.3680043.99.2.9"}),
		el(t, tag.TransferSyntaxUID, []string{explicit}),
		el(t, tag.PatientID, []string{"OTHER-PATIENT"}),
		el(t, tag.StudyInstanceUID, []string{"1.2.826.0.1.3680043.99.2.3"}),
	})
	_, err := Folder(context.Background(), src, filepath.Join(t.TempDir(), "out"), Options{}, nil)
	if err == nil || !strings.Contains(err.Error(), studyU) || !strings.Contains(err.Error(), "1.2.826.0.1.3680043.99.2.3") || !strings.Contains(err.Error(), "--study") {
		t.Fatalf("err = %v, want both studies named and how to choose", err)
	}
	res, err := Folder(context.Background(), src, filepath.Join(t.TempDir(), "out"), Options{Study: studyU}, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range res.Files {
		if filepath.Base(f.Src) == "other.dcm" {
			t.Errorf("the other study's file was copied")
		}
	}
	found := false
	for _, s := range res.Skipped {
		if filepath.Base(s.Path) == "other.dcm" && strings.Contains(s.Reason, "not to the chosen study "+studyU) {
			found = true
		}
	}
	if !found {
		t.Errorf("other.dcm not listed as of another study: %+v", res.Skipped)
	}
}

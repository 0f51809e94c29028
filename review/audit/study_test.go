package audit

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"dosecover/dosemap/dicomwrite"
	"dosecover/dosemap/testkit"

	"github.com/suyashkumar/dicom/pkg/tag"
)

// studyDICOM returns a minimal DICOM file (PS3.10 preamble, file meta,
// Explicit VR Little Endian) of the given study and series.
func studyDICOM(t *testing.T, study, series string) []byte {
	t.Helper()
	const mrClass = "1.2.840.10008.5.1.4.1.1.4"
	var e dicomwrite.Elements
	e.Add(tag.SOPClassUID, mrClass)
	e.Add(tag.SOPInstanceUID, series+".1")
	e.Add(tag.Modality, "MR")
	e.Add(tag.StudyInstanceUID, study)
	e.Add(tag.SeriesInstanceUID, series)
	data, err := dicomwrite.Encode(dicomwrite.Implementation{ClassUID: "2.25.1", VersionName: "AUDIT_TEST"}, mrClass, series+".1", e)
	if err != nil {
		t.Fatal(err)
	}
	return data
}

// TestDiscoverOneStudyInSubfolders: a folder whose series sit in
// subfolders of one study is one case; subfolders of different studies are
// separate cases (StudyInstanceUID (0020,000D), DICOM PS3.3 C.7.2.1).
func TestDiscoverOneStudyInSubfolders(t *testing.T) {
	root := t.TempDir()
	writeFiles(t, root, map[string][]byte{
		"case/anatomy/IM1":       studyDICOM(t, "2.25.1", "2.25.11"),
		"case/sonication-01/IM1": studyDICOM(t, "2.25.1", "2.25.12"),
		"case/sonication-02/IM1": studyDICOM(t, "2.25.1", "2.25.13"),
		"case/truth.json":        []byte("{}"),
		"reg/a/IM1":              studyDICOM(t, "2.25.2", "2.25.21"),
		"reg/b/series/IM1":       studyDICOM(t, "2.25.3", "2.25.31"),
	})
	cases, _, err := Discover([]string{filepath.Join(root, "case")})
	if err != nil {
		t.Fatal(err)
	}
	if len(cases) != 1 || cases[0].Name != "case" || len(cases[0].Files) != 4 {
		t.Errorf("one study in subfolders: %+v, want one case \"case\" of 4 files", cases)
	}
	cases, _, err = Discover([]string{filepath.Join(root, "reg")})
	if err != nil {
		t.Fatal(err)
	}
	if len(cases) != 2 || cases[0].Name != "reg/a" || cases[1].Name != "reg/b" {
		t.Errorf("two studies: %+v, want cases reg/a and reg/b", cases)
	}
}

// pydicomLayoutScript writes, with pydicom's own writer, one small MR image
// file per line of standard input: "relative/path STUDY_UID SERIES_UID
// PATIENT_ID" below the folder argv 1.
const pydicomLayoutScript = `
import os, sys
from pydicom.dataset import Dataset, FileMetaDataset
from pydicom.uid import ExplicitVRLittleEndian
root = sys.argv[1]
for n, line in enumerate(sys.stdin.read().split("\n")):
    if not line.strip():
        continue
    rel, study, series, pid = line.split()
    meta = FileMetaDataset()
    meta.MediaStorageSOPClassUID = "1.2.840.10008.5.1.4.1.1.4"
    meta.MediaStorageSOPInstanceUID = "%s.%d" % (series, n + 1)
    meta.TransferSyntaxUID = ExplicitVRLittleEndian
    ds = Dataset()
    ds.file_meta = meta
    ds.SOPClassUID = meta.MediaStorageSOPClassUID
    ds.SOPInstanceUID = meta.MediaStorageSOPInstanceUID
    ds.Modality = "MR"
    ds.PatientID = pid
    ds.PatientName = "PHANTOM^" + pid
    ds.StudyInstanceUID = study
    ds.SeriesInstanceUID = series
    ds.is_little_endian, ds.is_implicit_VR = True, False
    p = os.path.join(root, rel)
    os.makedirs(os.path.dirname(p), exist_ok=True)
    ds.save_as(p, write_like_original=False)
`

// TestDiscoverStudiesAnyLayout: a case is one study (StudyInstanceUID,
// DICOM PS3.3 C.7.2.1) wherever its files sit: four simulated cases in one
// subfolder, a broken case, another case, a flat folder of two studies, a
// study split over two folders and two studies of one patient, all written
// by pydicom. An audit gives one row per study, and the names are the same
// on a second run.
func TestDiscoverStudiesAnyLayout(t *testing.T) {
	py := testkit.Python(t)
	tmp := t.TempDir()
	in := filepath.Join(tmp, "in")
	var lines []string
	add := func(rel, study, series, pid string) {
		lines = append(lines, strings.Join([]string{rel, study, series, pid}, " "))
	}
	for k := 1; k <= 4; k++ {
		st := fmt.Sprintf("2.25.9%d", k)
		add(fmt.Sprintf("sim/case-%03d/anatomy/IM1", k), st, st+"1", fmt.Sprintf("SIM-%03d", k))
		add(fmt.Sprintf("sim/case-%03d/sonication-01/IM1", k), st, st+"2", fmt.Sprintf("SIM-%03d", k))
		add(fmt.Sprintf("sim/case-%03d/sonication-01/IM2", k), st, st+"2", fmt.Sprintf("SIM-%03d", k))
	}
	add("broken/IM1", "2.25.95", "2.25.951", "BROKEN")
	add("another/IM1", "2.25.96", "2.25.961", "OTHER")
	add("flat/a1", "2.25.97", "2.25.971", "FLAT-A")
	add("flat/a2", "2.25.97", "2.25.971", "FLAT-A")
	add("flat/b1", "2.25.98", "2.25.981", "FLAT-B")
	add("split/x/IM1", "2.25.99", "2.25.991", "SPLIT")
	add("split/y/IM1", "2.25.99", "2.25.992", "SPLIT")
	add("twice/first/IM1", "2.25.101", "2.25.1011", "SAME")
	add("twice/second/IM1", "2.25.102", "2.25.1021", "SAME")
	cmd := exec.Command(py, "-c", pydicomLayoutScript, in)
	cmd.Stdin = strings.NewReader(strings.Join(lines, "\n"))
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("pydicom: %v\n%s", err, out)
	}
	// The broken case: a truncated copy of its file beside it, and a note;
	// the flat folder holds a note too.
	b, err := os.ReadFile(filepath.Join(in, "broken", "IM1"))
	if err != nil {
		t.Fatal(err)
	}
	writeFiles(t, in, map[string][]byte{
		"broken/IM2":     b[:140],
		"broken/notes":   []byte("operator notes"),
		"flat/notes.txt": []byte("operator notes"),
	})
	type row struct {
		Name, Study string
		Files       []string
	}
	want := []row{
		{"in/another", "2.25.96", []string{"IM1"}},
		{"in/broken", "2.25.95", []string{"IM1", "IM2", "notes"}},
		{"in/flat/study-2.25.97", "2.25.97", []string{"a1", "a2", "notes.txt"}},
		{"in/flat/study-2.25.98", "2.25.98", []string{"b1", "notes.txt"}},
		{"in/sim/case-001", "2.25.91", []string{"anatomy/IM1", "sonication-01/IM1", "sonication-01/IM2"}},
		{"in/sim/case-002", "2.25.92", []string{"anatomy/IM1", "sonication-01/IM1", "sonication-01/IM2"}},
		{"in/sim/case-003", "2.25.93", []string{"anatomy/IM1", "sonication-01/IM1", "sonication-01/IM2"}},
		{"in/sim/case-004", "2.25.94", []string{"anatomy/IM1", "sonication-01/IM1", "sonication-01/IM2"}},
		{"in/split", "2.25.99", []string{"x/IM1", "y/IM1"}},
		{"in/twice/first", "2.25.101", []string{"IM1"}},
		{"in/twice/second", "2.25.102", []string{"IM1"}},
	}
	for run := 0; run < 2; run++ {
		cases, problems, err := Discover([]string{in})
		if err != nil || len(problems) > 0 {
			t.Fatalf("Discover: %v %v", err, problems)
		}
		var got []row
		for _, c := range cases {
			got = append(got, row{c.Name, c.Study, c.Files})
		}
		if !reflect.DeepEqual(got, want) {
			t.Fatalf("run %d:\n got %+v\nwant %+v", run, got, want)
		}
	}
	// The four simulated cases alone, given one level up, keep their names
	// below the folder given.
	cases, _, err := Discover([]string{filepath.Join(in, "sim")})
	if err != nil || len(cases) != 4 || cases[0].Name != "sim/case-001" {
		t.Fatalf("sim alone: %v %+v", err, cases)
	}

	fc := newFileCounter()
	sum, err := Run(context.Background(), Config{
		Inputs: []string{in}, OutDir: filepath.Join(tmp, "out"), Workers: 2, Analyzer: fc.analyze,
		Settings: json.RawMessage(`{"threshold": 240}`),
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(sum.Rows) != len(want) {
		t.Fatalf("%d rows for %d studies", len(sum.Rows), len(want))
	}
	for n, r := range sum.Rows {
		if r.Source != want[n].Name {
			t.Errorf("row %d: source %q, want %q", n, r.Source, want[n].Name)
		}
	}
}

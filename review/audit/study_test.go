package audit

import (
	"bytes"
	"path/filepath"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// studyDICOM returns a minimal DICOM file (PS3.10 preamble, file meta,
// Explicit VR Little Endian) of the given study and series.
func studyDICOM(t *testing.T, study, series string) []byte {
	t.Helper()
	var elems []*dicom.Element
	for _, e := range []struct {
		t tag.Tag
		v []string
	}{
		{tag.MediaStorageSOPClassUID, []string{"1.2.840.10008.5.1.4.1.1.4"}},
		{tag.MediaStorageSOPInstanceUID, []string{series + ".1"}},
		{tag.TransferSyntaxUID, []string{"1.2.840.10008.1.2.1"}},
		{tag.SOPClassUID, []string{"1.2.840.10008.5.1.4.1.1.4"}},
		{tag.SOPInstanceUID, []string{series + ".1"}},
		{tag.Modality, []string{"MR"}},
		{tag.StudyInstanceUID, []string{study}},
		{tag.SeriesInstanceUID, []string{series}},
	} {
		el, err := dicom.NewElement(e.t, e.v)
		if err != nil {
			t.Fatal(err)
		}
		elems = append(elems, el)
	}
	var buf bytes.Buffer
	if err := dicom.Write(&buf, dicom.Dataset{Elements: elems}); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
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

package dicomio

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap/sim"
)

// pydicomPython returns a python3 that imports pydicom (Debian's
// python3-pydicom); the test skips when there is none, except under
// CI=true, where it fails.
func pydicomPython(t testing.TB) string {
	t.Helper()
	for _, py := range []string{"python3", "/usr/bin/python3"} {
		if exec.Command(py, "-c", "import pydicom").Run() == nil {
			return py
		}
	}
	if os.Getenv("CI") == "true" {
		t.Fatal("python3 with pydicom not found (install python3-pydicom)")
	}
	t.Skip("python3 with pydicom not found (install python3-pydicom); skipping")
	return ""
}

// restudyScript copies every DICOM file of a folder (argv 1) into one flat
// folder (argv 2) with pydicom's own writer, as a second study of another
// patient: new StudyInstanceUID, SeriesInstanceUIDs, SOPInstanceUIDs and
// FrameOfReferenceUID (the same mapping in every file, referenced UIDs of
// the structure set included), PatientID argv 3, PatientName argv 4,
// StudyDate argv 5, file names prefixed by argv 6. With argv 3 "same" the
// files are written unchanged (still by pydicom).
const restudyScript = `
import os, sys
import pydicom
from pydicom.uid import generate_uid
src, dst, pid, pname, date, prefix = sys.argv[1:7]
os.makedirs(dst, exist_ok=True)
uids = {}
def remap(v):
    if v not in uids:
        uids[v] = generate_uid(prefix="2.25.", entropy_srcs=[v, pid])
    return uids[v]
def walk(ds):
    for el in ds:
        if el.VR == "SQ":
            for item in el.value:
                walk(item)
        elif el.VR == "UI" and el.tag not in (0x00080016, 0x00020002, 0x00020010, 0x00081150) and el.value:
            el.value = remap(str(el.value))
n = 0
for root, _, files in sorted(os.walk(src)):
    for f in sorted(files):
        p = os.path.join(root, f)
        try:
            ds = pydicom.dcmread(p)
        except Exception:
            continue
        if pid != "same":
            walk(ds)
            ds.file_meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
            ds.PatientID, ds.PatientName, ds.StudyDate = pid, pname, date
        n += 1
        ds.save_as(os.path.join(dst, "%s%05d.dcm" % (prefix, n)), write_like_original=True)
print(n)
`

// twoStudyFolder writes a two-sonication cut of the invented demo session
// (our writer) into single/, then, with pydicom, the same files unchanged
// and as a second study of another invented patient into one flat folder
// mixed/. It returns both folders.
func twoStudyFolder(t *testing.T) (single, mixed string) {
	t.Helper()
	py := pydicomPython(t)
	root := t.TempDir()
	single, mixed = filepath.Join(root, "single"), filepath.Join(root, "mixed")
	s := sim.DemoSession()
	s.Sonications = s.Sonications[:2]
	s.Motion = nil
	if _, err := sim.WriteSession(single, s); err != nil {
		t.Fatal(err)
	}
	for _, args := range [][]string{
		{"same", "", "", "a-"},
		{"SIM-SECOND", "PHANTOM^SECOND", "20260116", "b-"},
	} {
		cmd := exec.Command(py, append([]string{"-c", restudyScript, single, mixed}, args...)...)
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("pydicom: %v\n%s", err, out)
		}
	}
	return single, mixed
}

// A folder holding two studies (DICOM PS3.3 C.7.2.1: one StudyInstanceUID
// per study) is refused with both named; choosing one reads that study
// alone, the same case as its folder alone, and lists the other study's
// files as not used.
func TestTwoStudiesRefusedOrChosen(t *testing.T) {
	single, mixed := twoStudyFolder(t)
	ref, refInv, err := Load(t.Context(), single, LoadOptions{}, nil)
	if err != nil || !refInv.Reviewable {
		t.Fatalf("single study: %v %q", err, refInv.NotReviewable)
	}
	if len(refInv.Studies) != 1 || !refInv.Studies[0].Used || refInv.Study == "" {
		t.Fatalf("single study: studies %+v", refInv.Studies)
	}
	studyA := refInv.Study
	dicomFiles := refInv.Files - len(refInv.Skipped) // the folder alone holds the truth file too

	c, inv, err := Load(t.Context(), mixed, LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if inv.Reviewable || !inv.NeedsStudyChoice() || len(inv.Studies) != 2 {
		t.Fatalf("two studies: reviewable %v, studies %+v", inv.Reviewable, inv.Studies)
	}
	var studyB string
	for _, st := range inv.Studies {
		if st.UID != studyA {
			studyB = st.UID
		}
		if st.Files != dicomFiles || st.Series != len(refInv.Series) {
			t.Errorf("study %s: %d files, %d series; want %d, %d", st.UID, st.Files, st.Series, dicomFiles, len(refInv.Series))
		}
	}
	for _, want := range []string{studyA, studyB, "DEMO-001", "SIM-SECOND", "2026-01-15", "2026-01-16", "--study"} {
		if !strings.Contains(inv.NotReviewable, want) {
			t.Errorf("refusal %q does not name %q", inv.NotReviewable, want)
		}
	}
	if len(c.Sonications) != 0 || c.Anatomy != nil || len(inv.Series) != 0 {
		t.Errorf("a refused folder must not be read: %d sonications, anatomy %v, %d series", len(c.Sonications), c.Anatomy != nil, len(inv.Series))
	}
	var text strings.Builder
	inv.WriteText(&text)
	for _, want := range []string{"Studies (2)", "SIM-SECOND", "PHANTOM^SECOND", "DEMO-001", studyA, studyB} {
		if !strings.Contains(text.String(), want) {
			t.Errorf("inventory text lacks %q", want)
		}
	}

	for _, tc := range []struct {
		uid, patient, other string
	}{{studyA, "DEMO-001", "SIM-SECOND"}, {studyB, "SIM-SECOND", "DEMO-001"}} {
		c, inv, err := Load(t.Context(), mixed, LoadOptions{Study: tc.uid}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if !inv.Reviewable || inv.Study != tc.uid {
			t.Fatalf("study %s: reviewable %v (%s)", tc.uid, inv.Reviewable, inv.NotReviewable)
		}
		if !strings.HasPrefix(c.Label, "mixed (study of 2026-01-1") {
			t.Errorf("study %s: case label %q, want the folder and the study date", tc.uid, c.Label)
		}
		if c.Patient.ID != tc.patient {
			t.Errorf("study %s: patient %q, want %q", tc.uid, c.Patient.ID, tc.patient)
		}
		if len(c.Sonications) != len(ref.Sonications) || len(c.Structures) != len(ref.Structures) {
			t.Errorf("study %s: %d sonications, %d structures; alone %d, %d", tc.uid, len(c.Sonications), len(c.Structures), len(ref.Sonications), len(ref.Structures))
		}
		// The pixels are the same bytes: the same anatomy, exactly.
		if c.Anatomy == nil || len(c.Anatomy.Data) != len(ref.Anatomy.Data) {
			t.Fatalf("study %s: anatomy missing or of another size", tc.uid)
		}
		for n := range c.Anatomy.Data {
			if c.Anatomy.Data[n] != ref.Anatomy.Data[n] {
				t.Fatalf("study %s: anatomy voxel %d is %g, alone %g", tc.uid, n, c.Anatomy.Data[n], ref.Anatomy.Data[n])
			}
		}
		notUsed := 0
		for _, sk := range inv.Skipped {
			if strings.Contains(sk.Reason, "not to the chosen study") && strings.Contains(sk.Reason, tc.other) && !strings.Contains(sk.Reason, tc.uid) {
				notUsed++
			}
		}
		if notUsed != dicomFiles {
			t.Errorf("study %s: %d files listed as of the other study, want %d", tc.uid, notUsed, dicomFiles)
		}
	}

	_, inv, err = Load(t.Context(), mixed, LoadOptions{Study: "2.25.404"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if inv.Reviewable || !strings.Contains(inv.NotReviewable, "2.25.404") || !strings.Contains(inv.NotReviewable, studyB) {
		t.Errorf("absent study: reviewable %v, %q", inv.Reviewable, inv.NotReviewable)
	}
}

package dicomio

import (
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap/sim"
	"dosecover/dosemap/testkit"
)

// twoStudyFolder writes a two-sonication cut of the invented demo session
// (our writer) into single/, then, with pydicom, the same files unchanged
// and as a second study of another invented patient into one flat folder
// mixed/. It returns both folders.
func twoStudyFolder(t *testing.T) (single, mixed string) {
	t.Helper()
	py := testkit.Python(t)
	root := t.TempDir()
	single, mixed = filepath.Join(root, "single"), filepath.Join(root, "mixed")
	s := sim.DemoSession()
	s.Sonications = s.Sonications[:2]
	s.Motion = nil
	if _, err := sim.WriteSession(single, s); err != nil {
		t.Fatal(err)
	}
	testkit.Rewrite(t, py, single, mixed, "a-", nil)
	testkit.Rewrite(t, py, single, mixed, "b-", &testkit.Identity{PatientID: "SIM-SECOND", PatientName: "PHANTOM^SECOND", StudyDate: "20260116"})
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

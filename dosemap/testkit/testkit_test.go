package testkit_test

import (
	"os"
	"path/filepath"
	"regexp"
	"runtime"
	"testing"
	"time"

	"dosecover/dosemap/testkit"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// spinUntil burns CPU on the calling goroutine until meter reports more
// than it did at the start, or 10 s of wall time pass; it returns the
// advance seen. getrusage(2) counts user and system time, so work on this
// thread must advance both the process and the thread figure.
func spinUntil(meter func() (time.Duration, bool)) (time.Duration, bool) {
	c0, ok := meter()
	if !ok {
		return 0, false
	}
	x := 1.0
	for deadline := time.Now().Add(10 * time.Second); time.Now().Before(deadline); {
		for i := 0; i < 1e6; i++ {
			x = x*1.0000001 + 1e-9
		}
		if c, _ := meter(); c > c0 {
			return c - c0, x > 0
		}
	}
	return 0, true
}

// The CPU meters advance with work done (getrusage(2): RUSAGE_SELF for
// the process, RUSAGE_THREAD for the calling thread on Linux), and
// CPUTime agrees with ProcessCPU.
func TestCPUMetersAdvance(t *testing.T) {
	if _, ok := testkit.ProcessCPU(); !ok {
		if runtime.GOOS == "linux" {
			t.Fatal("ProcessCPU not measured on Linux")
		}
		t.Skip("CPU time not measured on " + runtime.GOOS)
	}
	if d, _ := spinUntil(testkit.ProcessCPU); d <= 0 {
		t.Error("process CPU time did not advance in 10 s of work")
	}
	if c := testkit.CPUTime(); c <= 0 {
		t.Errorf("CPUTime = %v after work, want > 0", c)
	}
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	d, ok := spinUntil(testkit.ThreadCPU)
	switch {
	case !ok && runtime.GOOS == "linux":
		t.Error("ThreadCPU not measured on Linux")
	case ok && d <= 0:
		t.Error("thread CPU time did not advance in 10 s of work")
	}
	// The thread's time is part of the process's (getrusage(2)).
	th, _ := testkit.ThreadCPU()
	pr, _ := testkit.ProcessCPU()
	if ok && th > pr {
		t.Errorf("thread CPU %v exceeds process CPU %v", th, pr)
	}
}

// read returns the named elements of a DICOM file, read by the DICOM
// library (github.com/suyashkumar/dicom), an implementation other than
// the writer under test.
func read(t *testing.T, path string, tags ...tag.Tag) map[tag.Tag]string {
	t.Helper()
	ds, err := dicom.ParseFile(path, nil, dicom.SkipPixelData())
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	got := map[tag.Tag]string{}
	for _, tg := range tags {
		el, err := ds.FindElementByTag(tg)
		if err != nil {
			t.Fatalf("%s: %v: %v", path, tg, err)
		}
		if s := dicom.MustGetStrings(el.Value); len(s) > 0 {
			got[tg] = s[0]
		}
	}
	return got
}

// Rewrite copies a folder with pydicom: unchanged, the data sets keep
// their identity and UIDs; as another study, every file takes the new
// patient, one new StudyInstanceUID (DICOM PS3.3 C.7.2.1) and new
// instance UIDs of the form 2.25.<integer> of at most 64 characters
// (PS3.5 9.1 and B.2), while the SOP Class UID and the meta header's
// instance UID (PS3.10 7.1: equal to SOPInstanceUID) stay consistent.
// Input: MR_small.dcm from pydicom's own test files, twice in two
// subfolders, beside a file that is not DICOM.
func TestRewrite(t *testing.T) {
	py := testkit.Python(t)
	mr, err := os.ReadFile(filepath.Join(testkit.PydicomTestFiles(t), "MR_small.dcm"))
	if err != nil {
		t.Fatal(err)
	}
	src := t.TempDir()
	for _, p := range []string{"a/IM1", "b/IM1"} {
		if err := os.MkdirAll(filepath.Join(src, filepath.Dir(p)), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(src, p), mr, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.WriteFile(filepath.Join(src, "notes.txt"), []byte("operator notes"), 0o644); err != nil {
		t.Fatal(err)
	}
	tags := []tag.Tag{tag.PatientID, tag.PatientName, tag.StudyDate, tag.StudyInstanceUID,
		tag.SeriesInstanceUID, tag.SOPInstanceUID, tag.SOPClassUID, tag.MediaStorageSOPInstanceUID}
	orig := read(t, filepath.Join(src, "a/IM1"), tags...)

	same := filepath.Join(t.TempDir(), "same")
	if n := testkit.Rewrite(t, py, src, same, "a-", nil); n != 2 {
		t.Fatalf("unchanged: %d files written, want 2 (the note left out)", n)
	}
	for _, f := range []string{"a-00001.dcm", "a-00002.dcm"} {
		if got := read(t, filepath.Join(same, f), tags...); !equal(got, orig) {
			t.Errorf("unchanged %s: %v, want %v", f, got, orig)
		}
	}

	other := filepath.Join(t.TempDir(), "other")
	as := &testkit.Identity{PatientID: "SIM-OTHER", PatientName: "PHANTOM^OTHER", StudyDate: "20260120"}
	if n := testkit.Rewrite(t, py, src, other, "b-", as); n != 2 {
		t.Fatalf("another study: %d files written, want 2", n)
	}
	uid := regexp.MustCompile(`^2\.25\.(0|[1-9][0-9]*)$`)
	first := read(t, filepath.Join(other, "b-00001.dcm"), tags...)
	for _, f := range []string{"b-00001.dcm", "b-00002.dcm"} {
		got := read(t, filepath.Join(other, f), tags...)
		if got[tag.PatientID] != as.PatientID || got[tag.PatientName] != as.PatientName || got[tag.StudyDate] != as.StudyDate {
			t.Errorf("%s: patient %q %q date %q, want %+v", f, got[tag.PatientID], got[tag.PatientName], got[tag.StudyDate], *as)
		}
		for _, tg := range []tag.Tag{tag.StudyInstanceUID, tag.SeriesInstanceUID, tag.SOPInstanceUID} {
			if got[tg] == orig[tg] || !uid.MatchString(got[tg]) || len(got[tg]) > 64 {
				t.Errorf("%s: %v = %q (was %q), want a new 2.25 UID of at most 64 characters", f, tg, got[tg], orig[tg])
			}
			// One mapping for every file: the same old UID gives the same new one.
			if got[tg] != first[tg] {
				t.Errorf("%s: %v = %q, the first file has %q", f, tg, got[tg], first[tg])
			}
		}
		if got[tag.SOPClassUID] != orig[tag.SOPClassUID] {
			t.Errorf("%s: SOP Class UID %q, want unchanged %q", f, got[tag.SOPClassUID], orig[tag.SOPClassUID])
		}
		if got[tag.MediaStorageSOPInstanceUID] != got[tag.SOPInstanceUID] {
			t.Errorf("%s: meta instance UID %q differs from SOPInstanceUID %q", f, got[tag.MediaStorageSOPInstanceUID], got[tag.SOPInstanceUID])
		}
	}
}

func equal(a, b map[tag.Tag]string) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if b[k] != v {
			return false
		}
	}
	return true
}

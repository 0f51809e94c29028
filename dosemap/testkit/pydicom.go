package testkit

import (
	_ "embed"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
)

// pythons are the interpreters tried, in order.
var pythons = []string{"python3", "/usr/bin/python3"}

// Python returns a python3 that imports pydicom (Debian python3-pydicom)
// and the further modules named (e.g. "numpy", Debian python3-numpy). The
// test skips when there is none, except under CI=true, where it fails.
func Python(t testing.TB, modules ...string) string {
	t.Helper()
	imports := "import " + strings.Join(append([]string{"pydicom"}, modules...), ", ")
	for _, name := range pythons {
		p, err := exec.LookPath(name)
		if err != nil {
			continue
		}
		if exec.Command(p, "-c", imports).Run() == nil {
			return p
		}
	}
	pkgs := []string{"python3-pydicom"}
	for _, m := range modules {
		pkgs = append(pkgs, "python3-"+m)
	}
	missing(t, "no python3 that can "+imports+" (install Debian "+strings.Join(pkgs, ", ")+")")
	return ""
}

// debianTestFiles is where Debian's python3-pydicom installs its test files.
const debianTestFiles = "/usr/lib/python3/dist-packages/pydicom/data/test_files"

var (
	testFilesOnce sync.Once
	testFilesDir  string
)

// FindPydicomTestFiles returns the folder of the DICOM test files that
// pydicom ships (MR_small.dcm, rtstruct.dcm, ...), asking python3 where
// pydicom lives (once per test binary) and then Debian's folder; "" when
// there is none. Tests that cannot run without the files call
// PydicomTestFiles instead.
func FindPydicomTestFiles() string {
	testFilesOnce.Do(func() {
		var dirs []string
		for _, py := range pythons {
			out, err := exec.Command(py, "-c", "import pydicom, os; print(os.path.dirname(pydicom.__file__))").Output()
			if err == nil {
				dirs = append(dirs, filepath.Join(strings.TrimSpace(string(out)), "data", "test_files"))
			}
		}
		for _, d := range append(dirs, debianTestFiles) {
			if _, err := os.Stat(filepath.Join(d, "MR_small.dcm")); err == nil {
				testFilesDir = d
				return
			}
		}
	})
	return testFilesDir
}

// PydicomTestFiles returns FindPydicomTestFiles' folder; the test skips
// when there is none, except under CI=true, where it fails.
func PydicomTestFiles(t testing.TB) string {
	t.Helper()
	d := FindPydicomTestFiles()
	if d == "" {
		missing(t, "pydicom test files not found (install Debian python3-pydicom)")
	}
	return d
}

// Identity is the patient and study a rewritten folder becomes.
type Identity struct {
	PatientID   string // (0010,0020); must not be "same"
	PatientName string // (0010,0010), e.g. "PHANTOM^SECOND"
	StudyDate   string // (0008,0020), YYYYMMDD
}

//go:embed rewrite.py
var rewriteScript string

// Rewrite copies every DICOM file below src into the flat folder dst with
// pydicom's own writer (run by py, from Python), an encoder independent of
// ours: files named prefix + a five-digit count + ".dcm" in the order of a
// sorted walk; files pydicom cannot read are left out. With as nil the
// data sets are written unchanged. Otherwise they become another study of
// another patient: as's identity, and every UID remapped (study, series,
// instance, frame of reference; one mapping for all files, so the UIDs a
// structure set references follow) except SOP Class UIDs and the transfer
// syntax. It returns the number of files written and fails the test on
// error.
func Rewrite(t testing.TB, py, src, dst, prefix string, as *Identity) int {
	t.Helper()
	args := []string{"-c", rewriteScript, src, dst, prefix, "same", "", ""}
	if as != nil {
		if as.PatientID == "same" || as.PatientID == "" {
			t.Fatalf("testkit.Rewrite: patient ID %q cannot name another patient", as.PatientID)
		}
		args = append(args[:5], as.PatientID, as.PatientName, as.StudyDate)
	}
	out, err := exec.Command(py, args...).Output()
	if err != nil {
		msg := ""
		if ee, ok := err.(*exec.ExitError); ok {
			msg = string(ee.Stderr)
		}
		t.Fatalf("pydicom rewriting %s into %s: %v\n%s", src, dst, err, msg)
	}
	n, err := strconv.Atoi(strings.TrimSpace(string(out)))
	if err != nil {
		t.Fatalf("pydicom rewriting %s: unexpected output %q", src, out)
	}
	return n
}

// missing skips the test with msg, or fails it under CI=true.
func missing(t testing.TB, msg string) {
	t.Helper()
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	t.Skip(msg)
}

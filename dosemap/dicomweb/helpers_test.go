package dicomweb

import (
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"sync"
	"testing"

	"dosecover/dosemap/sim"
)

// pythonWithPydicom finds a Python 3 that imports pydicom (Debian
// python3-pydicom); missing, it skips the test, or fails it under CI=true.
func pythonWithPydicom(t testing.TB) string {
	t.Helper()
	for _, py := range []string{"/usr/bin/python3", "python3"} {
		p, err := exec.LookPath(py)
		if err != nil {
			continue
		}
		if exec.Command(p, "-c", "import pydicom").Run() == nil {
			return p
		}
	}
	msg := "no python3 with pydicom (Debian python3-pydicom)"
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	t.Skip(msg)
	return ""
}

// resave is run by pydicom: it reads every DICOM file under argv[1] and
// writes it again under argv[2] (same relative path), so the case the
// archive receives was written by an outside DICOM implementation.
const resave = `
import os, sys, pydicom
src, dst = sys.argv[1], sys.argv[2]
n = 0
for root, _, files in os.walk(src):
    for f in files:
        if not f.endswith('.dcm'):
            continue
        ds = pydicom.dcmread(os.path.join(root, f))
        out = os.path.join(dst, os.path.relpath(root, src))
        os.makedirs(out, exist_ok=True)
        ds.save_as(os.path.join(out, f), write_like_original=False)
        n += 1
print(n)
`

var (
	caseOnce  sync.Once
	caseDir   string
	caseFiles [][]byte
	caseErr   string
)

// demoCase returns the demo session written by the simulator and saved
// again by pydicom: its folder and the bytes of its files (sorted by path).
// It is built once per test binary in a folder removed at exit (TestMain).
func demoCase(t testing.TB) (string, [][]byte) {
	t.Helper()
	py := pythonWithPydicom(t)
	caseOnce.Do(func() {
		root, err := os.MkdirTemp("", "dosecover-dicomweb-case-")
		if err != nil {
			caseErr = err.Error()
			return
		}
		tempRoots = append(tempRoots, root)
		src := filepath.Join(root, "sim")
		if _, err := sim.WriteDemo(src); err != nil {
			caseErr = err.Error()
			return
		}
		caseDir = filepath.Join(root, "case")
		if out, err := exec.Command(py, "-c", resave, src, caseDir).CombinedOutput(); err != nil {
			caseErr = "pydicom: " + err.Error() + ": " + string(out)
			return
		}
		var paths []string
		filepath.WalkDir(caseDir, func(p string, d os.DirEntry, err error) error {
			if err == nil && !d.IsDir() {
				paths = append(paths, p)
			}
			return nil
		})
		sort.Strings(paths)
		for _, p := range paths {
			b, err := os.ReadFile(p)
			if err != nil {
				caseErr = err.Error()
				return
			}
			caseFiles = append(caseFiles, b)
		}
	})
	if caseErr != "" {
		t.Fatal(caseErr)
	}
	return caseDir, caseFiles
}

var tempRoots []string

func TestMain(m *testing.M) {
	code := m.Run()
	for _, r := range tempRoots {
		os.RemoveAll(r)
	}
	os.Exit(code)
}

package dicomio

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
)

// pydicomDir returns the folder of the DICOM test files shipped with
// Debian's python3-pydicom (2.3.1). The test skips when it is missing,
// except under CI=true, where it fails.
func pydicomDir(t testing.TB) string {
	t.Helper()
	if d := findPydicom(); d != "" {
		return d
	}
	if os.Getenv("CI") == "true" {
		t.Fatal("pydicom test files not found (install python3-pydicom)")
	}
	t.Skip("pydicom test files not found (install python3-pydicom); skipping")
	return ""
}

// pydicomFile returns the path of one pydicom test file (skip/fail as above).
func pydicomFile(t testing.TB, name string) string {
	t.Helper()
	p := filepath.Join(pydicomDir(t), name)
	if _, err := os.Stat(p); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("pydicom test file %s missing: %v", name, err)
		}
		t.Skipf("pydicom test file %s missing; skipping", name)
	}
	return p
}

var (
	pydicomOnce sync.Once
	pydicomPath string
)

// findPydicom asks python3 (once) where pydicom lives; "" when it cannot.
func findPydicom() string {
	pydicomOnce.Do(func() { pydicomPath = askPython() })
	return pydicomPath
}

func askPython() string {
	for _, py := range []string{"python3", "/usr/bin/python3"} {
		out, err := exec.Command(py, "-c", "import pydicom, os; print(os.path.dirname(pydicom.__file__))").Output()
		if err == nil {
			d := filepath.Join(strings.TrimSpace(string(out)), "data", "test_files")
			if _, err := os.Stat(d); err == nil {
				return d
			}
		}
	}
	return ""
}

package dicomweb

import (
	"os"
	"path/filepath"
	"sort"
	"sync"
	"testing"

	"dosecover/dosemap/dicomweb/orthanctest"
	"dosecover/dosemap/sim"
	"dosecover/dosemap/testkit"
)

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
	py := testkit.Python(t)
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
		if err := orthanctest.Resave(py, src, caseDir); err != nil {
			caseErr = err.Error()
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

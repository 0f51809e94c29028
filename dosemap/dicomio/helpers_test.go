package dicomio

import (
	"os"
	"path/filepath"
	"testing"

	"dosecover/dosemap/testkit"
)

// pydicomFile returns the path of one of the DICOM test files shipped with
// Debian's python3-pydicom (2.3.1). The test skips when it is missing,
// except under CI=true, where it fails.
func pydicomFile(t testing.TB, name string) string {
	t.Helper()
	p := filepath.Join(testkit.PydicomTestFiles(t), name)
	if _, err := os.Stat(p); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("pydicom test file %s missing: %v", name, err)
		}
		t.Skipf("pydicom test file %s missing; skipping", name)
	}
	return p
}

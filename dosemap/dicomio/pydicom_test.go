package dicomio

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// Every .dcm of the pydicom test folder either reads or is reported with a
// reason; none may panic (readBytes recovers the library's panics, so a
// panic here would be one of ours).
func TestPydicomFolderEveryFile(t *testing.T) {
	dir := pydicomDir(t)
	paths, _ := filepath.Glob(filepath.Join(dir, "*.dcm"))
	if len(paths) < 20 {
		t.Fatalf("only %d .dcm files in %s", len(paths), dir)
	}
	for _, p := range paths {
		fi, err := readFile(p, true)
		if err != nil {
			if strings.TrimSpace(err.Error()) == "" {
				t.Errorf("%s: empty reason", filepath.Base(p))
			}
			t.Logf("%-45s skipped: %v", filepath.Base(p), err)
			continue
		}
		t.Logf("%-45s %s %s %dx%d frames %d", filepath.Base(p), fi.Modality, fi.Syntax, fi.Cols, fi.Rows, len(fi.Frames))
	}
	inv, err := Scan(t.Context(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	inv.WriteText(&b)
	t.Log(b.String())
	_ = os.Stdout
}

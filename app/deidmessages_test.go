package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestHidePathsOf: the messages of a de-identified analyze or report name
// the case folder and its files without their paths (which may carry the
// patient's name), whether the folder was given relative or absolute.
func TestHidePathsOf(t *testing.T) {
	root := t.TempDir()
	dir := filepath.Join(root, "DOEFAM_JANE")
	for _, f := range []string{"series_DOEFAM/IM0001.dcm", "series_DOEFAM/IM0002.dcm", "plan/rs_DOEFAM.dcm"} {
		p := filepath.Join(dir, filepath.FromSlash(f))
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte("x"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	t.Chdir(root)
	for _, given := range []string{"DOEFAM_JANE", dir} {
		var buf bytes.Buffer
		w := hidePathsOf(&buf, given)
		msgs := []string{
			"dosecover analyze: warning: 2 files of " + given + " were not used: series_DOEFAM/IM0002.dcm: truncated\n",
			"dosecover analyze: reading " + filepath.Join(dir, "plan", "rs_DOEFAM.dcm") + ": not an RTSTRUCT\n",
			"dosecover analyze: rs_DOEFAM.dcm in series_DOEFAM\n",
		}
		for _, m := range msgs {
			if n, err := w.Write([]byte(m)); err != nil || n != len(m) {
				t.Fatalf("write: %d, %v", n, err)
			}
		}
		got := buf.String()
		if strings.Contains(strings.ToUpper(got), "DOEFAM") {
			t.Errorf("given %s: messages keep the name:\n%s", given, got)
		}
		for _, want := range []string{"the case folder were not used: file 3: truncated", "reading the case folder/file 1", "file 1 in a folder of the case"} {
			if !strings.Contains(got, want) {
				t.Errorf("given %s: want %q in\n%s", given, want, got)
			}
		}
	}
}

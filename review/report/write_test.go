package report

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap/safefile"
)

// assertAbsent fails when the file at path contains any of the strings.
func assertAbsent(t *testing.T, path string, ss ...string) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range ss {
		if s != "" && bytes.Contains(b, []byte(s)) {
			t.Errorf("%s contains %q", path, s)
		}
	}
}

func TestWriteRefusesCaseFolder(t *testing.T) {
	caseDir := t.TempDir()
	os.WriteFile(filepath.Join(caseDir, "a.dcm"), []byte("x"), 0o644)
	out := t.TempDir()
	in := sampleInput()
	for _, o := range []Outputs{
		{PNG: filepath.Join(caseDir, "r.png")},
		{PNG: filepath.Join(out, "r.png"), CSV: filepath.Join(caseDir, "sub", "m.csv")},
	} {
		err := Write(in, caseDir, o)
		if !errors.Is(err, safefile.ErrInsideInput) || !strings.Contains(err.Error(), caseDir) {
			t.Errorf("Write(%+v) = %v, want a refusal naming the case folder", o, err)
		}
	}
	// Nothing was written anywhere: the check precedes every write.
	for _, d := range []string{caseDir, out} {
		ents, _ := os.ReadDir(d)
		if d == caseDir && len(ents) != 1 || d == out && len(ents) != 0 {
			t.Errorf("%s holds %d entries after refused writes", d, len(ents))
		}
	}
}

func TestWriteAllOutputs(t *testing.T) {
	dir := t.TempDir()
	in := sampleInput()
	o := Outputs{PNG: filepath.Join(dir, "r.png"), PDF: filepath.Join(dir, "r.pdf"), JSON: filepath.Join(dir, "m.json"), CSV: filepath.Join(dir, "m.csv"), DPI: 100}
	if err := Write(in, t.TempDir(), o); err != nil {
		t.Fatal(err)
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 4 {
		t.Errorf("%d files written, want 4 (no temporary files left)", len(ents))
	}
	png, _ := os.ReadFile(o.PNG)
	pdf, _ := os.ReadFile(o.PDF)
	if !bytes.HasPrefix(png, []byte("\x89PNG\r\n\x1a\n")) || !bytes.HasPrefix(pdf, []byte("%PDF-")) {
		t.Error("outputs lack their signatures")
	}
	// An unwritable target names the path.
	bad := filepath.Join(dir, "missing", "r.png")
	if err := Write(in, "", Outputs{PNG: bad}); err == nil || !strings.Contains(err.Error(), bad) {
		t.Errorf("err = %v, want one naming %s", err, bad)
	}
	if err := Write(in, "", Outputs{}); err == nil {
		t.Error("no outputs accepted")
	}
	if err := Write(in, "", Outputs{PNG: o.PNG, PDF: o.PNG}); err == nil {
		t.Error("one path for two outputs accepted")
	}
}

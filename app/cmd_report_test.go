//go:build cgo

package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap"
)

func TestReportUsage(t *testing.T) {
	dir := t.TempDir()
	for _, args := range [][]string{
		{"report"},                          // no case
		{"report", dir},                     // no output
		{"report", dir, "x", "-o", "a.png"}, // two folders
		{"report", dir, "-o", filepath.Join(t.TempDir(), "r.png"), "--model", "bogus"},
		{"report", dir, "-o", filepath.Join(t.TempDir(), "r.png"), "--margin", "-1"},
		{"report", dir, "-o", filepath.Join(t.TempDir(), "r.png"), "--exclude", "1,x"},
		{"report", dir, "-o", filepath.Join(t.TempDir(), "r.png"), "--dpi", "10"},
		{"report", "--bogus", dir},
	} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 2 {
			t.Errorf("%v: exit %d, want 2 (usage)\n%s", args, code, errb.String())
		}
	}
}

// Outputs inside the case folder are refused before anything is read, and
// nothing is written there.
func TestReportRefusesCaseFolder(t *testing.T) {
	caseDir := t.TempDir()
	os.WriteFile(filepath.Join(caseDir, "x.dcm"), []byte("not dicom"), 0o644)
	for _, args := range [][]string{
		{"report", caseDir, "-o", filepath.Join(caseDir, "r.png")},
		{"report", caseDir, "-o", filepath.Join(t.TempDir(), "r.png"), "--csv", filepath.Join(caseDir, "sub", "m.csv")},
	} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 1 {
			t.Errorf("%v: exit %d, want 1", args, code)
		}
		if !strings.Contains(errb.String(), "refusing") || !strings.Contains(errb.String(), caseDir) {
			t.Errorf("message %q does not refuse naming the case folder", errb.String())
		}
	}
	if ents, _ := os.ReadDir(caseDir); len(ents) != 1 {
		t.Errorf("case folder holds %d entries, want 1", len(ents))
	}
}

func TestReportUnwritableTarget(t *testing.T) {
	caseDir := t.TempDir()
	bad := filepath.Join(t.TempDir(), "no", "such", "r.png")
	var out, errb bytes.Buffer
	if code := run([]string{"report", caseDir, "-o", bad}, &out, &errb); code != 1 || !strings.Contains(errb.String(), bad) {
		t.Errorf("exit %d, message %q: want 1 naming %s", code, errb.String(), bad)
	}
}

func TestDeidentifyUsageAndRefusal(t *testing.T) {
	caseDir := t.TempDir()
	for _, args := range [][]string{
		{"deidentify"}, {"deidentify", caseDir}, {"deidentify", caseDir, t.TempDir(), "--dates", "keep"},
		{"deidentify", caseDir, t.TempDir(), "--dates", "remove", "--shift-days", "5"},
	} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 2 {
			t.Errorf("%v: exit %d, want 2", args, code)
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"deidentify", caseDir, filepath.Join(caseDir, "copy")}, &out, &errb); code != 1 || !strings.Contains(errb.String(), "refusing") {
		t.Errorf("output inside the case: exit %d, %q", code, errb.String())
	}
	full := t.TempDir()
	os.WriteFile(filepath.Join(full, "f"), nil, 0o644)
	errb.Reset()
	if code := run([]string{"deidentify", caseDir, full}, &out, &errb); code != 1 || !strings.Contains(errb.String(), "not empty") {
		t.Errorf("non-empty output: exit %d, %q", code, errb.String())
	}
}

func TestStructureFlags(t *testing.T) {
	c := &dosemap.Case{Structures: []dosemap.Structure{
		{Name: "A", Role: dosemap.RoleTarget}, {Name: "B", Role: dosemap.RoleOther}, {Name: "C", Role: dosemap.RoleAvoid},
	}}
	s := &structureFlags{target: "B"}
	if err := s.apply(c); err != nil {
		t.Fatal(err)
	}
	if c.Structures[0].Role != dosemap.RoleOther || c.Structures[1].Role != dosemap.RoleTarget || c.Structures[2].Role != dosemap.RoleAvoid {
		t.Errorf("roles after --target B: %v %v %v", c.Structures[0].Role, c.Structures[1].Role, c.Structures[2].Role)
	}
	if err := (&structureFlags{target: "Z"}).apply(c); err == nil || !strings.Contains(err.Error(), `"A", "B", "C"`) {
		t.Errorf("unknown target: %v, want the structures listed", err)
	}
	missing := filepath.Join(t.TempDir(), "none.json")
	if err := (&structureFlags{contours: missing}).apply(c); err == nil || !strings.Contains(err.Error(), missing) {
		t.Errorf("missing contour file: %v, want its path named", err)
	}
}

//go:build cgo

package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap/testkit"
)

func TestInspectUsage(t *testing.T) {
	for _, args := range [][]string{{"inspect"}, {"inspect", "a", "b"}, {"inspect", "--bogus", "x"}} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 2 {
			t.Errorf("%v: exit %d, want 2 (usage)", args, code)
		}
	}
}

func TestInspectMissingFolder(t *testing.T) {
	var out, errb bytes.Buffer
	if code := run([]string{"inspect", filepath.Join(t.TempDir(), "absent")}, &out, &errb); code != 1 {
		t.Errorf("exit %d, want 1", code)
	}
	if !strings.Contains(errb.String(), "absent") {
		t.Errorf("message does not name the folder: %q", errb.String())
	}
}

// An anatomy image and an unrelated structure set (pydicom's MR_small.dcm
// and rtstruct.dcm, two studies of two patients) are not a reviewable
// case: exit 1 with the reason, both studies listed.
func TestInspectNotReviewable(t *testing.T) {
	dir := testkit.PydicomTestFiles(t)
	caseDir := t.TempDir()
	for _, n := range []string{"MR_small.dcm", "rtstruct.dcm"} {
		if err := os.Symlink(filepath.Join(dir, n), filepath.Join(caseDir, n)); err != nil {
			t.Skip(err)
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"inspect", caseDir}, &out, &errb); code != 1 {
		t.Errorf("exit %d, want 1", code)
	}
	if !strings.Contains(out.String(), "Studies (2)") || !strings.Contains(errb.String(), "not a reviewable case") || !strings.Contains(errb.String(), "--study UID") {
		t.Errorf("output:\n%s\nstderr:\n%s", out.String(), errb.String())
	}
	out.Reset()
	if code := run([]string{"inspect", "--json", caseDir}, &out, &errb); code != 1 {
		t.Errorf("--json: exit %d, want 1", code)
	}
	var inv struct {
		Reviewable bool
		Studies    []struct{ UID, PatientID string }
	}
	if err := json.Unmarshal(out.Bytes(), &inv); err != nil {
		t.Fatalf("--json output is not JSON: %v", err)
	}
	if inv.Reviewable || len(inv.Studies) != 2 {
		t.Errorf("JSON inventory %+v", inv)
	}
}

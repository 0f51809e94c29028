//go:build cgo

package main

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"
)

// folderState records every entry below dir: path, kind, size, mode,
// modification time and (for files) the SHA-256 of the content. A folder's
// modification time changes when an entry is created or removed in it, so
// a temporary file written and deleted again also shows.
func folderState(t *testing.T, dir string) map[string]string {
	t.Helper()
	st := map[string]string{}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		fi, err := os.Lstat(p)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(dir, p)
		v := fmt.Sprintf("%v size %d mtime %d", fi.Mode(), fi.Size(), fi.ModTime().UnixNano())
		if fi.Mode().IsRegular() {
			data, err := os.ReadFile(p)
			if err != nil {
				return err
			}
			sum := sha256.Sum256(data)
			v += " sha256 " + hex.EncodeToString(sum[:])
		}
		st[rel] = v
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return st
}

// diffState lists what differs between two folder states.
func diffState(before, after map[string]string) []string {
	var d []string
	for p, v := range before {
		switch w, ok := after[p]; {
		case !ok:
			d = append(d, "removed "+p)
		case w != v:
			d = append(d, fmt.Sprintf("changed %s: %s -> %s", p, v, w))
		}
	}
	for p := range after {
		if _, ok := before[p]; !ok {
			d = append(d, "new "+p)
		}
	}
	sort.Strings(d)
	return d
}

// TestCommandsDoNotWriteIntoTheCase runs every command that reads a case
// folder on the simulated case, with every output it can write placed
// elsewhere, and fails on any change below the case folder (a new,
// removed or changed file or folder, including its modification time).
// The last rows ask for outputs inside the case folder, which must be
// refused without writing anything.
func TestCommandsDoNotWriteIntoTheCase(t *testing.T) {
	if testing.Short() {
		t.Skip("runs every command on a simulated case")
	}
	parent := t.TempDir()
	good := smallCase(t)
	caseDir := filepath.Join(parent, "case")
	if err := os.Rename(good, caseDir); err != nil {
		t.Fatal(err)
	}
	before := folderState(t, parent)
	out := t.TempDir()
	o := func(name string) string { return filepath.Join(out, name) }
	in := func(name string) string { return filepath.Join(caseDir, name) }
	for _, c := range []struct {
		args []string
		code int
	}{
		{[]string{"inspect", caseDir}, 0},
		{[]string{"inspect", "--json", caseDir}, 0},
		{[]string{"analyze", caseDir, "--json", o("result.json")}, 0},
		{[]string{"report", caseDir, "-o", o("r.png"), "--pdf", o("r.pdf"), "--json", o("m.json"), "--csv", o("m.csv")}, 0},
		{[]string{"deidentify", caseDir, o("teaching")}, 0},
		{[]string{"audit", parent, "-o", o("audit")}, 0},
		{[]string{"audit", parent, "-o", o("audit"), "--resume"}, 0},
		// Outputs asked for inside the case folder are refused.
		{[]string{"analyze", caseDir, "--json", in("result.json")}, 1},
		{[]string{"report", caseDir, "-o", in("r.png")}, 1},
		{[]string{"report", caseDir, "--csv", in("anatomy/m.csv")}, 1},
		{[]string{"deidentify", caseDir, in("teaching")}, 1},
		{[]string{"deidentify", caseDir, caseDir}, 1},
		{[]string{"audit", parent, "-o", in("audit")}, 2},
	} {
		code, stdout, stderr := runCmd(c.args...)
		if code != c.code {
			t.Errorf("%s: exit %d, want %d\n%s%s", strings.Join(c.args, " "), code, c.code, lastLines(stdout, 5), stderr)
		}
		if c.code != 0 && !strings.Contains(stderr, caseDir) {
			t.Errorf("%s: the refusal does not name the case folder: %s", strings.Join(c.args, " "), stderr)
		}
		if d := diffState(before, folderState(t, parent)); len(d) > 0 {
			t.Fatalf("%s changed the folder it read:\n%s", strings.Join(c.args, " "), strings.Join(d, "\n"))
		}
	}
	// The outputs asked for were written.
	for _, p := range []string{"result.json", "r.png", "r.pdf", "m.json", "m.csv", "teaching", "audit/summary.csv"} {
		if _, err := os.Stat(o(p)); err != nil {
			t.Errorf("output %s: %v", p, err)
		}
	}
}

// TestFolderStateSeesChanges: the guard above catches a new file, a file
// created and removed again (through its folder's modification time), a
// changed byte and a touched modification time.
func TestFolderStateSeesChanges(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "sub", "a.dcm")
	os.MkdirAll(filepath.Dir(p), 0o755)
	os.WriteFile(p, []byte("abcd"), 0o644)
	old := time.Now().Add(-time.Hour)
	os.Chtimes(p, old, old)
	os.Chtimes(filepath.Dir(p), old, old)
	for _, c := range []struct {
		name   string
		change func()
	}{
		{"new file", func() { os.WriteFile(filepath.Join(dir, "sub", "new.json"), nil, 0o644) }},
		{"temporary file", func() {
			q := filepath.Join(dir, "sub", ".tmp")
			os.WriteFile(q, nil, 0o644)
			os.Remove(q)
		}},
		{"changed byte, same size and time", func() {
			os.WriteFile(p, []byte("abce"), 0o644)
			os.Chtimes(p, old, old)
			os.Chtimes(filepath.Dir(p), old, old)
		}},
		{"touched", func() { os.Chtimes(p, old, time.Now()) }},
	} {
		os.Chtimes(filepath.Dir(p), old, old)
		before := folderState(t, dir)
		c.change()
		if d := diffState(before, folderState(t, dir)); len(d) == 0 {
			t.Errorf("%s: not seen", c.name)
		}
	}
}

package safefile

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

func TestWriteFileReplacesAtomically(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out.txt")
	if err := os.WriteFile(path, []byte("old"), 0o644); err != nil {
		t.Fatal(err)
	}
	// A failing writer leaves the earlier file untouched and no temporary file.
	boom := errors.New("boom")
	err := WriteFile(path, func(w io.Writer) error {
		io.WriteString(w, "half")
		return boom
	})
	if !errors.Is(err, boom) || !strings.Contains(err.Error(), path) {
		t.Fatalf("error %v: want boom naming %s", err, path)
	}
	if b, _ := os.ReadFile(path); string(b) != "old" {
		t.Fatalf("file after failed write = %q, want the old content", b)
	}
	if err := WriteFile(path, func(w io.Writer) error { _, err := io.WriteString(w, "new"); return err }); err != nil {
		t.Fatal(err)
	}
	if b, _ := os.ReadFile(path); string(b) != "new" {
		t.Fatalf("file = %q, want new", b)
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		var names []string
		for _, e := range ents {
			names = append(names, e.Name())
		}
		t.Fatalf("folder holds %v, want only out.txt", names)
	}
}

func TestWriteFileUnwritable(t *testing.T) {
	dir := t.TempDir()
	missing := filepath.Join(dir, "no", "such", "folder", "r.png")
	err := WriteFile(missing, func(io.Writer) error { return nil })
	if err == nil || !strings.Contains(err.Error(), missing) {
		t.Fatalf("error %v: want one naming %s", err, missing)
	}
	if runtime.GOOS != "windows" && os.Geteuid() != 0 {
		ro := filepath.Join(dir, "ro")
		os.Mkdir(ro, 0o555)
		p := filepath.Join(ro, "r.png")
		if err := WriteFile(p, func(io.Writer) error { return nil }); err == nil || !strings.Contains(err.Error(), p) {
			t.Fatalf("error %v: want one naming %s", err, p)
		}
	}
	// A folder given as the target.
	if err := WriteFile(dir, func(io.Writer) error { return nil }); err == nil {
		t.Fatal("writing over a folder succeeded")
	}
}

func TestCheckOutside(t *testing.T) {
	root := t.TempDir()
	caseDir := filepath.Join(root, "case")
	os.MkdirAll(filepath.Join(caseDir, "sub"), 0o755)
	link := filepath.Join(root, "link")
	if err := os.Symlink(caseDir, link); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		path   string
		inside bool
	}{
		{filepath.Join(caseDir, "r.png"), true},
		{filepath.Join(caseDir, "sub", "r.png"), true},
		{filepath.Join(caseDir, "new", "deeper", "r.png"), true},
		{caseDir, true},
		{filepath.Join(link, "r.png"), true}, // through a symbolic link
		{filepath.Join(caseDir, "..", "r.png"), false},
		{filepath.Join(root, "case2", "r.png"), false}, // a sibling sharing the prefix
		{filepath.Join(root, "r.png"), false},
	} {
		err := CheckOutside(caseDir, c.path)
		if got := errors.Is(err, ErrInsideInput); got != c.inside {
			t.Errorf("CheckOutside(%s) = %v, want inside=%v", c.path, err, c.inside)
		}
		if c.inside && !strings.Contains(err.Error(), c.path) {
			t.Errorf("message %q does not name %s", err, c.path)
		}
	}
	if err := CheckOutside("", filepath.Join(caseDir, "x")); err != nil {
		t.Errorf("no input folder: %v", err)
	}
}

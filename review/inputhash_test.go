package review

import (
	"context"
	"os"
	"path/filepath"
	"testing"
)

// TestHashInputs checks the input hash against a value computed outside
// the project with Python's hashlib:
//
//	h = hashlib.sha256()
//	for name, data in [("a.dcm", b"abc"), ("sub/b", b"")]:
//	    h.update(name.encode() + b"\0" + struct.pack(">Q", len(data)) + data)
//
// and checks that a changed byte, a renamed or added file changes it while
// moving the folder does not.
func TestHashInputs(t *testing.T) {
	const want = "519ed693108e317a34fe11114b508739e537873f6e36f407f9020e91f2e00de2" // Python hashlib
	write := func(dir string, files map[string]string) {
		for name, data := range files {
			p := filepath.Join(dir, filepath.FromSlash(name))
			if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(p, []byte(data), 0o644); err != nil {
				t.Fatal(err)
			}
		}
	}
	ctx := context.Background()
	dir := t.TempDir()
	write(dir, map[string]string{"a.dcm": "abc", "sub/b": ""})
	got, n, err := HashInputs(ctx, dir)
	if err != nil || got != want || n != 2 {
		t.Fatalf("HashInputs = %s, %d files, %v; want %s, 2", got, n, err, want)
	}
	if h, err := HashFiles(ctx, dir, []string{"sub/b", "a.dcm"}); err != nil || h != want {
		t.Errorf("HashFiles in another order = %s, %v", h, err)
	}
	moved := filepath.Join(t.TempDir(), "elsewhere")
	write(moved, map[string]string{"a.dcm": "abc", "sub/b": ""})
	if h, _, _ := HashInputs(ctx, moved); h != want {
		t.Errorf("moved folder hashes to %s", h)
	}
	write(moved, map[string]string{"a.dcm": "abd"})
	if h, _, _ := HashInputs(ctx, moved); h == want {
		t.Error("a changed byte left the hash unchanged")
	}
	if err := os.Rename(filepath.Join(dir, "sub", "b"), filepath.Join(dir, "sub", "c")); err != nil {
		t.Fatal(err)
	}
	if h, _, _ := HashInputs(ctx, dir); h == want {
		t.Error("a renamed file left the hash unchanged")
	}
	if _, _, err := HashInputs(ctx, filepath.Join(dir, "nope")); err == nil {
		t.Error("missing folder accepted")
	}
	cancelled, cancel := context.WithCancel(ctx)
	cancel()
	if _, _, err := HashInputs(cancelled, dir); err == nil {
		t.Error("cancelled context: no error")
	}
}

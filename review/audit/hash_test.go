package audit

import (
	"context"
	"path/filepath"
	"testing"
)

// TestInputHash checks the hash against a value computed outside the
// project with Python's hashlib:
//
//	h = hashlib.sha256()
//	for name, data in [("a.dcm", b"abc"), ("sub/b", b"")]:
//	    h.update(name.encode() + b"\0" + struct.pack(">Q", len(data)) + data)
func TestInputHash(t *testing.T) {
	dir := t.TempDir()
	writeFiles(t, dir, map[string][]byte{"a.dcm": []byte("abc"), "sub/b": nil})
	c, err := collect(dir, "x")
	if err != nil {
		t.Fatal(err)
	}
	got, err := InputHash(context.Background(), &c)
	if err != nil {
		t.Fatal(err)
	}
	const want = "519ed693108e317a34fe11114b508739e537873f6e36f407f9020e91f2e00de2" // Python hashlib
	if got != want {
		t.Errorf("InputHash = %s, want %s", got, want)
	}
	// Renaming a file changes the hash.
	writeFiles(t, dir, map[string][]byte{"sub/c": nil})
	c2, _ := collect(dir, "x")
	if h, _ := InputHash(context.Background(), &c2); h == want {
		t.Error("adding a file left the hash unchanged")
	}
	// Moving the folder does not.
	moved := filepath.Join(t.TempDir(), "elsewhere")
	writeFiles(t, moved, map[string][]byte{"a.dcm": []byte("abc"), "sub/b": nil})
	c3, _ := collect(moved, "y")
	if h, _ := InputHash(context.Background(), &c3); h != want {
		t.Errorf("moved folder hashes to %s", h)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := InputHash(ctx, &c); err == nil {
		t.Error("cancelled context: no error")
	}
}

// TestSettingsHash: key order and white space do not matter; the value is
// SHA-256 of the compact, key-sorted JSON, checked with Python's hashlib
// over b'{"margin_mm":5,"threshold":240}'.
func TestSettingsHash(t *testing.T) {
	const want = "f7dc778439207e610d2915625e99738a7c4037a7e7465fe59771455c462733e0" // Python hashlib
	for _, s := range []string{`{"threshold":240,"margin_mm":5}`, "{ \"margin_mm\" : 5,\n \"threshold\": 240 }"} {
		h, err := SettingsHash([]byte(s))
		if err != nil || h != want {
			t.Errorf("SettingsHash(%q) = %s, %v; want %s", s, h, err, want)
		}
	}
	if h, _ := SettingsHash([]byte(`{"threshold":240.5,"margin_mm":5}`)); h == want {
		t.Error("another threshold gives the same hash")
	}
	if _, err := SettingsHash([]byte(`{"a":`)); err == nil {
		t.Error("broken JSON: no error")
	}
}

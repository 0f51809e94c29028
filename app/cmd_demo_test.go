//go:build cgo

package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestDemoUsage(t *testing.T) {
	for _, args := range [][]string{{"demo"}, {"demo", "a", "b"}, {"demo", "--bogus", "x"}, {"demo", "x", "--cases", "-1"}} {
		var out, errb bytes.Buffer
		if code := run(args, &out, &errb); code != 2 {
			t.Errorf("%v: exit %d, want 2 (usage)", args, code)
		}
	}
}

// A folder that holds anything is refused, untouched, with a message naming
// it.
func TestDemoRefusesNonEmptyFolder(t *testing.T) {
	dir := t.TempDir()
	keep := filepath.Join(dir, "notes.txt")
	os.WriteFile(keep, []byte("mine"), 0o644)
	var out, errb bytes.Buffer
	if code := run([]string{"demo", dir}, &out, &errb); code != 1 {
		t.Fatalf("exit %d, want 1", code)
	}
	if !strings.Contains(errb.String(), dir) || !strings.Contains(errb.String(), "not empty") {
		t.Errorf("message %q", errb.String())
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("folder changed: %v", entries)
	}
}

func TestDemoWritesCase(t *testing.T) {
	if testing.Short() {
		t.Skip("writes the demo case")
	}
	dir := filepath.Join(t.TempDir(), "new")
	var out, errb bytes.Buffer
	if code := run([]string{"demo", dir}, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	raw, err := os.ReadFile(filepath.Join(dir, "demo", "truth.json"))
	if err != nil {
		t.Fatal(err)
	}
	var truth struct {
		PatientName string `json:"patient_name"`
		Sonications []any  `json:"sonications"`
	}
	if err := json.Unmarshal(raw, &truth); err != nil {
		t.Fatal(err)
	}
	if truth.PatientName != "PHANTOM^GEL" || len(truth.Sonications) != 15 {
		t.Errorf("truth: %+v", truth)
	}
}

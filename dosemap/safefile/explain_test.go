package safefile

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestCheckDir: every way a folder argument can be wrong gives a message
// naming the path once and the problem in words, without the system call
// ("stat", "open") the os package puts in front; the cause stays visible
// to errors.Is.
func TestCheckDir(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "notes.txt")
	if err := os.WriteFile(file, []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name, path, want string
		is               error
	}{
		{"folder", dir, "", nil},
		{"missing", filepath.Join(dir, "absent"), "case folder " + filepath.Join(dir, "absent") + ": does not exist", fs.ErrNotExist},
		{"file", file, "case folder " + file + ": is a file, not a folder", ErrNotFolder},
		{"below a file", filepath.Join(file, "x"), "case folder " + filepath.Join(file, "x") + ": a part of the path is a file, not a folder", nil},
	} {
		err := CheckDir("case folder", c.path)
		if c.want == "" {
			if err != nil {
				t.Errorf("%s: %v", c.name, err)
			}
			continue
		}
		if err == nil || err.Error() != c.want {
			t.Errorf("%s: got %v, want %q", c.name, err, c.want)
			continue
		}
		if strings.Count(err.Error(), c.path) != 1 {
			t.Errorf("%s: %q names the path more than once", c.name, err)
		}
		if c.is != nil && !errors.Is(err, c.is) {
			t.Errorf("%s: errors.Is(%v, %v) is false", c.name, err, c.is)
		}
	}
}

// TestReason words the causes the os package reports.
func TestReason(t *testing.T) {
	_, statErr := os.Stat(filepath.Join(t.TempDir(), "absent"))
	for _, c := range []struct {
		err  error
		want string
	}{
		{nil, ""},
		{statErr, "does not exist"},
		{&fs.PathError{Op: "open", Path: "/x", Err: fs.ErrPermission}, "permission denied"},
		{fmt.Errorf("writing: %w", fs.ErrPermission), "permission denied"},
		{errors.New("disk on fire"), "disk on fire"},
	} {
		if got := Reason(c.err); got != c.want {
			t.Errorf("Reason(%v) = %q, want %q", c.err, got, c.want)
		}
	}
}

func ExampleCheckDir() {
	err := CheckDir("case folder", "/no/such/case")
	fmt.Println(err)
	fmt.Println(errors.Is(err, fs.ErrNotExist))
	// Output:
	// case folder /no/such/case: does not exist
	// true
}

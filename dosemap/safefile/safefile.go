// Package safefile writes output files atomically and keeps them out of the
// folders dosecover reads.
//
// A file is first written to a temporary file in the target's own folder,
// flushed to disk, and then renamed over the target (rename is atomic within
// one file system, POSIX.1-2017 rename()), so a reader never sees a half
// written report and a failed write leaves any earlier file intact.
package safefile

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
)

// ErrInsideInput is returned (wrapped) when an output would land inside a
// folder that is being read.
var ErrInsideInput = errors.New("inside the input folder")

// WriteFile creates or replaces path with what write produces, atomically.
// When write fails, or the file cannot be created, nothing is left behind
// and the error names path.
func WriteFile(path string, write func(w io.Writer) error) (err error) {
	dir := filepath.Dir(path)
	fi, err := os.Stat(dir)
	if err != nil {
		return &PathError{What: "writing " + path + ": folder", Path: dir, Err: err}
	}
	if !fi.IsDir() {
		return fmt.Errorf("writing %s: %s is not a folder", path, dir)
	}
	if fi, err := os.Stat(path); err == nil && fi.IsDir() {
		return fmt.Errorf("writing %s: it is a folder", path)
	}
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".part-*")
	if err != nil {
		return &PathError{What: "writing", Path: path, Err: err}
	}
	defer func() {
		if err != nil {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	bw := bufio.NewWriterSize(tmp, 1<<16)
	if err = write(bw); err != nil {
		return &PathError{What: "writing", Path: path, Err: err}
	}
	if err = bw.Flush(); err != nil {
		return &PathError{What: "writing", Path: path, Err: err}
	}
	if err = tmp.Sync(); err != nil {
		return &PathError{What: "writing", Path: path, Err: err}
	}
	if err = tmp.Chmod(0o644); err != nil {
		return &PathError{What: "writing", Path: path, Err: err}
	}
	if err = tmp.Close(); err != nil {
		return &PathError{What: "writing", Path: path, Err: err}
	}
	if err = os.Rename(tmp.Name(), path); err != nil {
		return &PathError{What: "writing", Path: path, Err: err}
	}
	return nil
}

// resolve returns the absolute, symlink-free form of p. Trailing components
// that do not exist yet are kept as written.
func resolve(p string) (string, error) {
	abs, err := filepath.Abs(p)
	if err != nil {
		return "", err
	}
	var rest []string
	cur := abs
	for {
		if r, err := filepath.EvalSymlinks(cur); err == nil {
			parts := append([]string{r}, rest...)
			return filepath.Join(parts...), nil
		}
		parent := filepath.Dir(cur)
		if parent == cur {
			return abs, nil
		}
		rest = append([]string{filepath.Base(cur)}, rest...)
		cur = parent
	}
}

// Within reports whether path is dir itself or lies anywhere below it,
// after making both absolute and resolving symbolic links.
func Within(dir, path string) (bool, error) {
	d, err := resolve(dir)
	if err != nil {
		return false, err
	}
	p, err := resolve(path)
	if err != nil {
		return false, err
	}
	rel, err := filepath.Rel(d, p)
	if err != nil {
		return false, nil
	}
	return rel == "." || (rel != ".." && !strings.HasPrefix(rel, ".."+string(filepath.Separator))), nil
}

// CheckOutside returns an error wrapping ErrInsideInput when path lies in
// (or is) the input folder inputDir; the message names both.
func CheckOutside(inputDir, path string) error {
	if inputDir == "" {
		return nil
	}
	in, err := Within(inputDir, path)
	if err != nil {
		return fmt.Errorf("checking %s against %s: %w", path, inputDir, err)
	}
	if in {
		return fmt.Errorf("refusing to write %s: it is %w %s (dosecover never writes into the folders it reads; choose another place)", path, ErrInsideInput, inputDir)
	}
	return nil
}

package audit

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"time"
)

// tempPrefix starts the name of every temporary file the package writes;
// only such files are removed as leftovers of an interrupted run.
const tempPrefix = ".dosecover-"

// writeAtomic writes the file at p through fill: into a temporary file in
// the same folder, synced and then renamed over p, so that p is either
// absent, the old file or the complete new one, never half written.
func writeAtomic(p string, fill func(w io.Writer) error) error {
	tmp, err := writeTemp(p, fill)
	if err != nil {
		return err
	}
	if err := os.Rename(tmp, p); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", p, err)
	}
	return nil
}

// createAtomic writes the file at p through fill unless p exists, and
// reports whether it wrote it. The complete temporary file is linked to p,
// which fails when p exists, so of several processes creating p at once
// exactly one succeeds and none sees p half written. On a file system
// without hard links it falls back to a rename when p is absent.
func createAtomic(p string, fill func(w io.Writer) error) (bool, error) {
	tmp, err := writeTemp(p, fill)
	if err != nil {
		return false, err
	}
	defer os.Remove(tmp)
	err = os.Link(tmp, p)
	switch {
	case err == nil:
		return true, nil
	case errors.Is(err, fs.ErrExist):
		return false, nil
	}
	if _, serr := os.Lstat(p); serr == nil {
		return false, nil
	} else if !errors.Is(serr, fs.ErrNotExist) {
		return false, fmt.Errorf("writing %s: %w", p, serr)
	}
	if err := os.Rename(tmp, p); err != nil {
		return false, fmt.Errorf("writing %s: %w", p, err)
	}
	return true, nil
}

// writeTemp writes fill's output into a new temporary file next to p
// (created with its folder when missing), synced, closed and readable by
// all, and returns its path.
func writeTemp(p string, fill func(w io.Writer) error) (tmp string, err error) {
	dir := filepath.Dir(p)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return "", fmt.Errorf("writing %s: %w", p, err)
	}
	f, err := os.CreateTemp(dir, tempPrefix+filepath.Base(p)+".*.tmp")
	if err != nil {
		return "", fmt.Errorf("writing %s: %w", p, err)
	}
	tmp = f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
		}
	}()
	if err = fill(f); err != nil {
		return "", fmt.Errorf("writing %s: %w", p, err)
	}
	if err = f.Sync(); err != nil {
		return "", fmt.Errorf("writing %s: %w", p, err)
	}
	if err = f.Close(); err != nil {
		return "", fmt.Errorf("writing %s: %w", p, err)
	}
	if err = os.Chmod(tmp, 0o644); err != nil {
		return "", fmt.Errorf("writing %s: %w", p, err)
	}
	return tmp, nil
}

// removeTemps removes the temporary files an earlier, killed run left in
// the folders an audit writes (dir itself and each dir/cases/<case>; never
// deeper, never elsewhere): only regular files with names made by
// writeTemp, last written more than age ago; age 0 removes them all.
func removeTemps(dir string, age time.Duration) error {
	cutoff := time.Now().Add(-age)
	folders := []string{dir}
	if ents, err := os.ReadDir(filepath.Join(dir, "cases")); err == nil {
		for _, e := range ents {
			if e.IsDir() { // symbolic links are not followed
				folders = append(folders, filepath.Join(dir, "cases", e.Name()))
			}
		}
	}
	for _, f := range folders {
		ents, err := os.ReadDir(f)
		if err != nil {
			if os.IsNotExist(err) {
				continue
			}
			return fmt.Errorf("removing leftover temporary files in %s: %w", dir, err)
		}
		for _, e := range ents {
			if !e.Type().IsRegular() || !isTempName(e.Name()) {
				continue
			}
			if age > 0 {
				fi, err := e.Info()
				if err != nil || fi.ModTime().After(cutoff) {
					continue
				}
			}
			if err := os.Remove(filepath.Join(f, e.Name())); err != nil && !os.IsNotExist(err) {
				return fmt.Errorf("removing leftover temporary files in %s: %w", dir, err)
			}
		}
	}
	return nil
}

// isTempName reports whether name is one writeTemp makes:
// tempPrefix + base + "." + random digits + ".tmp".
func isTempName(name string) bool {
	if !strings.HasPrefix(name, tempPrefix) || !strings.HasSuffix(name, ".tmp") {
		return false
	}
	rest := strings.TrimSuffix(name, ".tmp")
	dot := strings.LastIndexByte(rest, '.')
	if dot < len(tempPrefix) || dot == len(rest)-1 {
		return false
	}
	for _, c := range rest[dot+1:] {
		if c < '0' || c > '9' {
			return false
		}
	}
	return true
}

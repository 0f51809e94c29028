package audit

import (
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
func writeAtomic(p string, fill func(w io.Writer) error) (err error) {
	dir := filepath.Dir(p)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("writing %s: %w", p, err)
	}
	f, err := os.CreateTemp(dir, tempPrefix+filepath.Base(p)+".*.tmp")
	if err != nil {
		return fmt.Errorf("writing %s: %w", p, err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
		}
	}()
	if err = fill(f); err != nil {
		return fmt.Errorf("writing %s: %w", p, err)
	}
	if err = f.Sync(); err != nil {
		return fmt.Errorf("writing %s: %w", p, err)
	}
	if err = f.Close(); err != nil {
		return fmt.Errorf("writing %s: %w", p, err)
	}
	if err = os.Chmod(tmp, 0o644); err != nil {
		return fmt.Errorf("writing %s: %w", p, err)
	}
	if err = os.Rename(tmp, p); err != nil {
		return fmt.Errorf("writing %s: %w", p, err)
	}
	return nil
}

// removeTemps removes the temporary files an earlier, killed run left below
// dir (only names made by writeAtomic) that were last written more than
// age ago; age 0 removes them all.
func removeTemps(dir string, age time.Duration) error {
	cutoff := time.Now().Add(-age)
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			if os.IsNotExist(err) {
				return nil
			}
			return err
		}
		if d.IsDir() || !strings.HasPrefix(d.Name(), tempPrefix) || !strings.HasSuffix(d.Name(), ".tmp") {
			return nil
		}
		if age > 0 {
			fi, err := d.Info()
			if err != nil || fi.ModTime().After(cutoff) {
				return nil
			}
		}
		if err := os.Remove(p); err != nil && !os.IsNotExist(err) {
			return err
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("removing leftover temporary files in %s: %w", dir, err)
	}
	return nil
}

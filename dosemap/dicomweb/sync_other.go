//go:build !linux

package dicomweb

import (
	"os"
	"path/filepath"
)

// syncFolder flushes every file of dir to disk, one by one.
func syncFolder(dir string) error {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return err
	}
	for _, e := range ents {
		f, err := os.OpenFile(filepath.Join(dir, e.Name()), os.O_RDWR, 0)
		if err != nil {
			continue
		}
		err = f.Sync()
		f.Close()
		if err != nil {
			return err
		}
	}
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	return d.Sync()
}

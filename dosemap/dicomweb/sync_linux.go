package dicomweb

import (
	"os"

	"golang.org/x/sys/unix"
)

// syncFolder flushes every file written into dir to disk with one
// syncfs(2) of its file system.
func syncFolder(dir string) error {
	f, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer f.Close()
	return unix.Syncfs(int(f.Fd()))
}

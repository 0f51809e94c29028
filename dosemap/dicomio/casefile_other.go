//go:build !linux

package dicomio

import (
	"io/fs"
	"os"
	"time"
)

// caseFile is one file of a case open for reading.
type caseFile struct{ *os.File }

// openCaseFile opens path for reading, without blocking on a FIFO;
// errors are *os.PathError.
func openCaseFile(path string) (caseFile, error) {
	f, err := os.OpenFile(path, os.O_RDONLY|openNonblock, 0)
	return caseFile{f}, err
}

// stat returns the file's size, modification time and type.
func (f caseFile) stat() (size int64, mod time.Time, mode fs.FileMode, err error) {
	st, err := f.Stat()
	if err != nil {
		return 0, time.Time{}, 0, err
	}
	return st.Size(), st.ModTime(), st.Mode().Type(), nil
}

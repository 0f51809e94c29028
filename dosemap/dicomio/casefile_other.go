//go:build !linux

package dicomio

import (
	"os"
	"time"
)

// caseFile is one file of a case open for reading.
type caseFile struct{ *os.File }

// openCaseFile opens path for reading; errors are *os.PathError.
func openCaseFile(path string) (caseFile, error) {
	f, err := os.Open(path)
	return caseFile{f}, err
}

// stat returns the file's size and modification time.
func (f caseFile) stat() (size int64, mod time.Time, err error) {
	st, err := f.Stat()
	if err != nil {
		return 0, time.Time{}, err
	}
	return st.Size(), st.ModTime(), nil
}

package dicomio

import (
	"io"
	"os"
	"syscall"
	"time"
)

// caseFile is one file of a case open for reading. On Linux it is a plain
// file descriptor: an os.File would also ask the file's status and flags
// at open, try to register it with the network poller and set a
// finalizer, which for the thousands of small files of a session costs as
// much as reading them.
type caseFile struct {
	fd   int
	path string
}

// openCaseFile opens path for reading; errors are *os.PathError, as from
// os.Open.
func openCaseFile(path string) (caseFile, error) {
	for {
		fd, err := syscall.Open(path, syscall.O_RDONLY|syscall.O_CLOEXEC, 0)
		if err == syscall.EINTR {
			continue
		}
		if err != nil {
			return caseFile{fd: -1}, &os.PathError{Op: "open", Path: path, Err: err}
		}
		return caseFile{fd: fd, path: path}, nil
	}
}

// Close closes the file.
func (f caseFile) Close() error { return syscall.Close(f.fd) }

// stat returns the file's size and modification time.
func (f caseFile) stat() (size int64, mod time.Time, err error) {
	var st syscall.Stat_t
	for {
		err = syscall.Fstat(f.fd, &st)
		if err != syscall.EINTR {
			break
		}
	}
	if err != nil {
		return 0, time.Time{}, &os.PathError{Op: "stat", Path: f.path, Err: err}
	}
	return st.Size, time.Unix(st.Mtim.Sec, st.Mtim.Nsec), nil
}

// Read implements io.Reader.
func (f caseFile) Read(b []byte) (int, error) {
	if len(b) == 0 {
		return 0, nil
	}
	for {
		n, err := syscall.Read(f.fd, b)
		if err == syscall.EINTR {
			continue
		}
		if err != nil {
			return 0, &os.PathError{Op: "read", Path: f.path, Err: err}
		}
		if n == 0 {
			return 0, io.EOF
		}
		return n, nil
	}
}

// ReadAt implements io.ReaderAt.
func (f caseFile) ReadAt(b []byte, off int64) (int, error) {
	done := 0
	for done < len(b) {
		n, err := syscall.Pread(f.fd, b[done:], off+int64(done))
		if err == syscall.EINTR {
			continue
		}
		if err != nil {
			return done, &os.PathError{Op: "read", Path: f.path, Err: err}
		}
		if n == 0 {
			return done, io.EOF
		}
		done += n
	}
	return done, nil
}

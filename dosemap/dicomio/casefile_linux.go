package dicomio

import (
	"io"
	"io/fs"
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
// os.Open. The file is opened without blocking, so that a FIFO (named
// pipe) with no writer cannot hold the reader: stat then reports it as
// not regular, and it is not read. Reads of regular files are unaffected.
func openCaseFile(path string) (caseFile, error) {
	for {
		fd, err := syscall.Open(path, syscall.O_RDONLY|syscall.O_CLOEXEC|syscall.O_NONBLOCK, 0)
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

// stat returns the file's size, modification time and type.
func (f caseFile) stat() (size int64, mod time.Time, mode fs.FileMode, err error) {
	var st syscall.Stat_t
	for {
		err = syscall.Fstat(f.fd, &st)
		if err != syscall.EINTR {
			break
		}
	}
	if err != nil {
		return 0, time.Time{}, 0, &os.PathError{Op: "stat", Path: f.path, Err: err}
	}
	switch st.Mode & syscall.S_IFMT {
	case syscall.S_IFREG:
	case syscall.S_IFDIR:
		mode = fs.ModeDir
	case syscall.S_IFIFO:
		mode = fs.ModeNamedPipe
	case syscall.S_IFCHR:
		mode = fs.ModeDevice | fs.ModeCharDevice
	case syscall.S_IFBLK:
		mode = fs.ModeDevice
	case syscall.S_IFSOCK:
		mode = fs.ModeSocket
	default:
		mode = fs.ModeIrregular
	}
	return st.Size, time.Unix(st.Mtim.Sec, st.Mtim.Nsec), mode, nil
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

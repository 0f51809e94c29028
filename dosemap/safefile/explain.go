package safefile

import (
	"errors"
	"io"
	"io/fs"
	"os"
	"syscall"
)

// Reason returns the cause of a file-system error in plain words, without
// the system call and path that *fs.PathError adds ("stat x: no such file
// or directory" becomes "does not exist"), so that a message can name the
// file once, in its own words. Other errors are returned as they read.
func Reason(err error) string {
	switch {
	case err == nil:
		return ""
	case errors.Is(err, fs.ErrNotExist):
		return "does not exist"
	case errors.Is(err, fs.ErrPermission):
		return "permission denied"
	case errors.Is(err, syscall.ENOTDIR):
		return "a part of the path is a file, not a folder"
	case errors.Is(err, syscall.EISDIR):
		return "is a folder, not a file"
	case errors.Is(err, syscall.ENOSPC):
		return "no space left on the device"
	case errors.Is(err, syscall.EROFS):
		return "the file system is read-only"
	case errors.Is(err, syscall.ENAMETOOLONG):
		return "the name is too long"
	case errors.Is(err, syscall.ELOOP):
		return "too many levels of symbolic links"
	}
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err.Error()
	}
	return err.Error()
}

// PathError is a file-system error worded for the user: What names the
// kind of item ("case folder", "output file"), Path the item, and Err the
// cause, which errors.Is and errors.As still see.
type PathError struct {
	What, Path string
	Err        error
}

// Error returns "What Path: Reason(Err)", e.g. "case folder /data/x: does
// not exist".
func (e *PathError) Error() string { return e.What + " " + e.Path + ": " + Reason(e.Err) }

// Unwrap returns the cause.
func (e *PathError) Unwrap() error { return e.Err }

// CheckDir returns nil when dir is a folder that can be listed, and
// otherwise a *PathError naming it as what ("case folder", "input folder")
// and saying what is wrong: it does not exist, it is a file, it cannot be
// read.
func CheckDir(what, dir string) error {
	fi, err := statDir(dir)
	if err != nil {
		return &PathError{What: what, Path: dir, Err: err}
	}
	if !fi.IsDir() {
		return &PathError{What: what, Path: dir, Err: ErrNotFolder}
	}
	return nil
}

// ErrNotFolder is the cause of a CheckDir error for a path that is a file.
var ErrNotFolder = errors.New("is a file, not a folder")

// statDir stats dir and, when it is a folder, checks that it can be listed.
func statDir(dir string) (fs.FileInfo, error) {
	fi, err := os.Stat(dir)
	if err != nil || !fi.IsDir() {
		return fi, err
	}
	f, err := os.Open(dir)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	if _, err := f.Readdirnames(1); err != nil && !errors.Is(err, io.EOF) {
		return nil, err
	}
	return fi, nil
}

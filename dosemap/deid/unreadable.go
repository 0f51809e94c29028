package deid

import (
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
)

// errParserFailed wraps a panic of the DICOM library on a malformed file.
var errParserFailed = errors.New("the DICOM parser failed on malformed data")

// unreadable words why the DICOM library could not read the file at path,
// for the list of files not copied: empty, not DICOM, truncated, or the
// library's own reason.
func unreadable(path string, err error) string {
	head := make([]byte, 132)
	n := 0
	if f, oerr := os.Open(path); oerr == nil {
		n, _ = io.ReadFull(f, head)
		f.Close()
	}
	msg := err.Error()
	switch {
	case errors.Is(err, errParserFailed):
		return "unreadable: " + msg
	case n == 0:
		return "empty file"
	case (n < 132 || string(head[128:132]) != "DICM") && !looksPreambleLess(head[:n]):
		return "not a DICOM file (no DICM marker)"
	case errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) || strings.Contains(msg, "EOF") ||
		strings.Contains(msg, "not enough bytes") || strings.Contains(msg, "exceeds current limit"):
		return "truncated: the file ends before its last element"
	}
	return fmt.Sprintf("not a readable DICOM file (%s)", msg)
}

// looksPreambleLess reports whether head starts like a DICOM data set
// written without the 128-byte preamble: group 0002 or 0008 in either byte
// order (PS3.10 7.1 requires the preamble, but such files exist).
func looksPreambleLess(head []byte) bool {
	if len(head) < 8 {
		return false
	}
	le := uint16(head[0]) | uint16(head[1])<<8
	be := uint16(head[1]) | uint16(head[0])<<8
	return le == 2 || le == 8 || be == 2 || be == 8
}

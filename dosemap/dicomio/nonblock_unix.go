//go:build unix && !linux

package dicomio

import "syscall"

// openNonblock opens files without blocking on a FIFO with no writer (the
// file's type is checked before anything is read).
const openNonblock = syscall.O_NONBLOCK

//go:build unix

package audit

import (
	"errors"
	"syscall"
)

// processGone reports whether no process with the given id runs on this
// machine (signal 0 checks without sending anything; EPERM means it exists
// under another user).
func processGone(pid int) bool {
	if pid <= 0 {
		return false
	}
	err := syscall.Kill(pid, 0)
	return errors.Is(err, syscall.ESRCH)
}

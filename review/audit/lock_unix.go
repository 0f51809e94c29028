//go:build unix

package audit

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"syscall"
	"time"
)

// LockFile is the file in an output folder that runs lock while they
// write there (flock(2); the lock goes with the process, so a killed run
// leaves none behind).
const LockFile = ".audit.lock"

// A shard that finds the lock held alone tries shareTries more times,
// shareWait apart (5 s in all), before it takes the holder for a whole
// run.
const (
	shareTries = 100
	shareWait  = 50 * time.Millisecond
)

// lockOutDir takes a run's lock on outDir: a whole run holds it alone; the
// shards of one audit share it. When no other run holds it, alone is
// true and clean (the removal of the leftovers of killed runs) runs while
// the lock is still held alone, before a shard shares it. A whole run
// while another run writes there, or a shard while a whole run does, is
// refused with an error naming the folder. release ends the lock.
func lockOutDir(outDir, given string, shard bool, clean func() error) (release func(), alone bool, err error) {
	p := filepath.Join(outDir, LockFile)
	f, err := os.OpenFile(p, os.O_RDWR|os.O_CREATE, 0o644)
	if err != nil {
		return nil, false, fmt.Errorf("output folder %s: cannot open its lock file %s: %w", given, LockFile, err)
	}
	fd := int(f.Fd())
	flock := func(how int) error {
		for {
			err := syscall.Flock(fd, how|syscall.LOCK_NB)
			if err != syscall.EINTR {
				return err
			}
		}
	}
	busy := func(err error) error {
		f.Close()
		if errors.Is(err, syscall.EWOULDBLOCK) {
			what := "another audit run (a whole run or a shard)"
			if shard {
				what = "a whole audit run"
			}
			return &UsageError{fmt.Sprintf("output folder %s is in use by %s: wait until it finishes or choose another output folder", given, what)}
		}
		return fmt.Errorf("output folder %s: locking %s: %w", given, LockFile, err)
	}
	err = flock(syscall.LOCK_EX)
	switch {
	case err == nil:
		alone = true
		if clean != nil {
			// Alone: no other run can be writing, so the leftovers may go.
			if err := clean(); err != nil {
				f.Close()
				return nil, false, err
			}
		}
		if shard {
			// Then share the lock with the other shards (the kernel
			// converts it without letting another lock in between).
			if err := flock(syscall.LOCK_SH); err != nil {
				return nil, false, busy(err)
			}
		}
	case shard && errors.Is(err, syscall.EWOULDBLOCK):
		// Another shard may hold the lock alone for the moment it takes
		// to clean; a whole run holds it to its end. So a shard tries
		// for a few seconds before it gives up.
		for tries := 0; ; tries++ {
			err = flock(syscall.LOCK_SH)
			if err == nil {
				break
			}
			if !errors.Is(err, syscall.EWOULDBLOCK) || tries == shareTries {
				return nil, false, busy(err)
			}
			time.Sleep(shareWait)
		}
	default:
		return nil, false, busy(err)
	}
	return func() { f.Close() }, alone, nil
}

package dicomweb

import (
	"crypto/rand"
	"encoding/hex"
	"fmt"
	"os"
	"path/filepath"
)

// writeInstance writes data to path atomically, as dosemap/safefile does
// (a temporary file in the same folder renamed over path, POSIX rename()),
// but without flushing each file to disk: a study of thousands of files
// would spend most of its time in fsync. Retrieve flushes the folder once
// at the end (syncFolder); a file present after a crash before that flush
// is checked again on resumption (presentFile).
func writeInstance(path string, data []byte) error {
	dir, base := filepath.Split(path)
	var rnd [6]byte
	rand.Read(rnd[:])
	tmp, err := os.OpenFile(filepath.Join(dir, "."+base+".part-"+hex.EncodeToString(rnd[:])), os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	_, err = tmp.Write(data)
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(tmp.Name(), path)
	}
	if err != nil {
		os.Remove(tmp.Name())
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}

// presentFile reports whether path holds a file whose DICOM meta
// information names instance sop. A file emptied by a crash before the
// folder was flushed fails the check and is fetched again.
func presentFile(path, sop string) bool {
	f, err := os.Open(path)
	if err != nil {
		return false
	}
	defer f.Close()
	buf := make([]byte, 1024)
	n, _ := f.Read(buf)
	got, err := SOPInstanceUID(buf[:n])
	return err == nil && got == sop
}

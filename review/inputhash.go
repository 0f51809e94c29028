package review

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
)

// HashInputs returns the hex SHA-256 (FIPS 180-4) over every regular file
// below dir (see HashFiles) and the number of files: the one input hash
// that ties reports, review records, sign-offs and audit records to
// exactly the files they were made from. It only reads, and stops with
// ctx's error when ctx is cancelled.
func HashInputs(ctx context.Context, dir string) (string, int, error) {
	var rels []string
	err := filepath.WalkDir(dir, func(p string, e fs.DirEntry, err error) error {
		if err != nil {
			return fmt.Errorf("reading %s: %w", p, err)
		}
		if err := ctx.Err(); err != nil {
			return err
		}
		if e.Type().IsRegular() {
			r, err := filepath.Rel(dir, p)
			if err != nil {
				return err
			}
			rels = append(rels, filepath.ToSlash(r))
		}
		return nil
	})
	if err != nil {
		return "", 0, err
	}
	sum, err := HashFiles(ctx, dir, rels)
	return sum, len(rels), err
}

// HashFiles returns the hex SHA-256 (FIPS 180-4) over the files rels
// (slash-separated paths relative to dir). Files are taken in the sorted
// order of their paths; for each the hash takes the path, a zero byte, the
// size as 8 bytes big-endian and the content. Renaming, adding, removing or
// changing any file changes the result; moving the whole folder does not.
func HashFiles(ctx context.Context, dir string, rels []string) (string, error) {
	rels = slices.Clone(rels)
	slices.Sort(rels)
	h := sha256.New()
	buf := make([]byte, 256<<10)
	for _, rel := range rels {
		if err := ctx.Err(); err != nil {
			return "", err
		}
		p := filepath.Join(dir, filepath.FromSlash(rel))
		f, err := os.Open(p)
		if err != nil {
			return "", fmt.Errorf("hashing %s: %w", p, err)
		}
		fi, err := f.Stat()
		if err != nil {
			f.Close()
			return "", fmt.Errorf("hashing %s: %w", p, err)
		}
		io.WriteString(h, rel)
		var hdr [9]byte // a zero byte, then the size
		binary.BigEndian.PutUint64(hdr[1:], uint64(fi.Size()))
		h.Write(hdr[:])
		n, err := io.CopyBuffer(h, f, buf)
		f.Close()
		if err != nil {
			return "", fmt.Errorf("hashing %s: %w", p, err)
		}
		if n != fi.Size() {
			return "", fmt.Errorf("hashing %s: file changed while being read", p)
		}
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

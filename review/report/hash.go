package report

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
	"sort"
)

// HashFolder returns the hex SHA-256 (FIPS 180-4) over every regular file
// below dir, so a report can be tied to exactly the files it was made
// from. Files are taken in the sorted order of their slash-separated paths
// relative to dir; for each the hash takes the path, a zero byte, the size
// as 8 bytes big-endian and the content. Renaming, adding, removing or
// changing any file changes the result. It only reads.
func HashFolder(dir string) (string, error) {
	sum, _, err := HashFolderContext(context.Background(), dir)
	return sum, err
}

// HashFolderContext is HashFolder that also returns the number of files
// hashed and stops with ctx's error when ctx is cancelled.
func HashFolderContext(ctx context.Context, dir string) (string, int, error) {
	var rels []string
	err := filepath.WalkDir(dir, func(p string, e fs.DirEntry, err error) error {
		if err != nil {
			return fmt.Errorf("reading %s: %w", p, err)
		}
		if ctx.Err() != nil {
			return ctx.Err()
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
	sort.Strings(rels)
	h := sha256.New()
	for _, r := range rels {
		if ctx.Err() != nil {
			return "", 0, ctx.Err()
		}
		p := filepath.Join(dir, filepath.FromSlash(r))
		f, err := os.Open(p)
		if err != nil {
			return "", 0, fmt.Errorf("reading %s: %w", p, err)
		}
		fi, err := f.Stat()
		if err != nil {
			f.Close()
			return "", 0, fmt.Errorf("reading %s: %w", p, err)
		}
		io.WriteString(h, r)
		var hdr [9]byte
		binary.BigEndian.PutUint64(hdr[1:], uint64(fi.Size()))
		h.Write(hdr[:])
		n, err := io.Copy(h, f)
		f.Close()
		if err != nil {
			return "", 0, fmt.Errorf("reading %s: %w", p, err)
		}
		if n != fi.Size() {
			return "", 0, fmt.Errorf("reading %s: size changed while reading", p)
		}
	}
	return hex.EncodeToString(h.Sum(nil)), len(rels), nil
}

package audit

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// InputHash returns the SHA-256 (FIPS 180-4) of a case's inputs, in hex.
// For every file of c.Files, in their sorted order, the hash takes the
// slash-separated relative path, a zero byte, the file size as 8 bytes big
// endian, and the file contents. Renaming, adding, removing or changing any
// file changes the hash; moving the whole case folder does not. It is the
// same hash as report.HashFolder of the case folder, so a case's report and
// its row of the summary carry the same value.
func InputHash(ctx context.Context, c *Case) (string, error) {
	h := sha256.New()
	buf := make([]byte, 256<<10)
	for _, rel := range c.Files {
		if err := ctx.Err(); err != nil {
			return "", err
		}
		p := filepath.Join(c.Dir, filepath.FromSlash(rel))
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
		var hdr [9]byte
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

// CanonicalSettings returns settings as compact JSON with the keys of every
// object sorted, so that equal settings give equal bytes whatever their
// formatting or key order in a settings file.
func CanonicalSettings(settings []byte) ([]byte, error) {
	if len(bytes.TrimSpace(settings)) == 0 {
		return []byte("{}"), nil
	}
	var v any
	d := json.NewDecoder(bytes.NewReader(settings))
	d.UseNumber()
	if err := d.Decode(&v); err != nil {
		return nil, fmt.Errorf("settings: %w", err)
	}
	// encoding/json writes map keys sorted.
	return json.Marshal(v)
}

// SettingsHash returns the SHA-256 of the canonical form of settings, in
// hex.
func SettingsHash(settings []byte) (string, error) {
	c, err := CanonicalSettings(settings)
	if err != nil {
		return "", err
	}
	s := sha256.Sum256(c)
	return hex.EncodeToString(s[:]), nil
}

package audit

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"

	"dosecover/review"
)

// InputHash returns the input hash of a case (review.HashFiles over
// c.Files), the hash a case's report and review records carry too.
func InputHash(ctx context.Context, c *Case) (string, error) {
	return review.HashFiles(ctx, c.Dir, c.Files)
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

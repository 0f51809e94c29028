//go:build cgo

package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"time"

	"dosecover/review"
	"dosecover/review/report"
)

// reviewRecord is what dosecover remembers about the review of one case:
// the settings used for it and the sign-offs. It lives in the user's
// configuration folder, never in the case folder.
type reviewRecord struct {
	Format    string           `json:"format"` // "dosecover-review/1"
	CaseDir   string           `json:"case_dir,omitempty"`
	CaseLabel string           `json:"case_label,omitempty"`
	InputHash string           `json:"input_sha256"` // see hashInputs
	Files     int              `json:"input_files"`
	Settings  analysisSettings `json:"settings"`
	Updated   time.Time        `json:"updated"`
	SignOffs  []review.SignOff `json:"sign_offs,omitempty"`
}

const recordFormat = "dosecover-review/1"

// reviewsDir returns the folder of the review records; overridden in tests.
var reviewsDir = func() (string, error) {
	d, err := os.UserConfigDir()
	if err != nil {
		return "", fmt.Errorf("finding the user configuration folder: %w", err)
	}
	return filepath.Join(d, "dosecover", "reviews"), nil
}

// hashInputs returns the SHA-256 of the input files that the reports print
// (review/report.HashFolderContext) and the number of files; it stops when
// ctx is cancelled.
func hashInputs(ctx context.Context, dir string) (string, int, error) {
	return report.HashFolderContext(ctx, dir)
}

// recordPath returns where the record of the input with hash lives.
func recordPath(hash string) (string, error) {
	d, err := reviewsDir()
	if err != nil {
		return "", err
	}
	if len(hash) < 16 {
		return "", fmt.Errorf("input hash %q is too short", hash)
	}
	return filepath.Join(d, hash[:32]+".json"), nil
}

// loadRecord returns the saved record for hash, or nil when there is none.
func loadRecord(hash string) (*reviewRecord, error) {
	p, err := recordPath(hash)
	if err != nil {
		return nil, err
	}
	b, err := os.ReadFile(p)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, fmt.Errorf("reading review record %s: %w", p, err)
	}
	var r reviewRecord
	if err := json.Unmarshal(b, &r); err != nil {
		return nil, fmt.Errorf("reading review record %s: %w", p, err)
	}
	if r.Format != recordFormat || r.InputHash != hash {
		return nil, fmt.Errorf("review record %s is not a %s record of this case", p, recordFormat)
	}
	return &r, nil
}

// save writes r atomically (temporary file, then rename).
func (r *reviewRecord) save() error {
	p, err := recordPath(r.InputHash)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		return fmt.Errorf("creating %s: %w", filepath.Dir(p), err)
	}
	r.Format = recordFormat
	r.Updated = time.Now().UTC()
	b, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return err
	}
	tmp := p + ".tmp"
	if err := os.WriteFile(tmp, b, 0o644); err != nil {
		return fmt.Errorf("writing review record %s: %w", p, err)
	}
	if err := os.Rename(tmp, p); err != nil {
		return fmt.Errorf("writing review record %s: %w", p, err)
	}
	return nil
}

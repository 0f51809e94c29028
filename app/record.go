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

	"dosecover/dosemap"
	"dosecover/review"
)

// reviewRecord is what dosecover remembers about the review of one case:
// the settings used for it and the sign-offs. It lives in the user's
// configuration folder, never in the case folder.
type reviewRecord struct {
	Format    string           `json:"format"` // recordFormat
	CaseDir   string           `json:"case_dir,omitempty"`
	CaseLabel string           `json:"case_label,omitempty"`
	InputHash string           `json:"input_sha256"` // see hashInputs
	Files     int              `json:"input_files"`
	Settings  review.Settings  `json:"settings"`
	Updated   time.Time        `json:"updated"`
	SignOffs  []review.SignOff `json:"sign_offs,omitempty"`
}

// recordFormat names the layout of the records written now: the settings
// as review.Settings. Records of recordFormatV1 (the window's earlier
// settings layout) are still read and are written again as recordFormat.
const (
	recordFormat   = "dosecover-review/2"
	recordFormatV1 = "dosecover-review/1"
)

// reviewsDir returns the folder of the review records; overridden in tests.
var reviewsDir = func() (string, error) {
	d, err := os.UserConfigDir()
	if err != nil {
		return "", fmt.Errorf("finding the user configuration folder: %w", err)
	}
	return filepath.Join(d, "dosecover", "reviews"), nil
}

// hashInputs returns the input hash of dir that the reports print
// (review.HashInputs) and the number of files; it stops when ctx is
// cancelled.
func hashInputs(ctx context.Context, dir string) (string, int, error) {
	return review.HashInputs(ctx, dir)
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
	var head struct {
		Format    string          `json:"format"`
		InputHash string          `json:"input_sha256"`
		Settings  json.RawMessage `json:"settings"`
	}
	if err := json.Unmarshal(b, &head); err != nil {
		return nil, fmt.Errorf("reading review record %s: %w", p, err)
	}
	if (head.Format != recordFormat && head.Format != recordFormatV1) || head.InputHash != hash {
		return nil, fmt.Errorf("review record %s is not a %s record of this case", p, recordFormat)
	}
	var r reviewRecord
	if head.Format == recordFormatV1 {
		// Everything but the settings kept its layout.
		var v1 struct {
			reviewRecord
			Settings json.RawMessage `json:"settings"`
		}
		if err := json.Unmarshal(b, &v1); err != nil {
			return nil, fmt.Errorf("reading review record %s: %w", p, err)
		}
		r = v1.reviewRecord
		if r.Settings, err = readLegacySettings(v1.Settings); err != nil {
			return nil, fmt.Errorf("reading review record %s: %w", p, err)
		}
		return &r, nil
	}
	r.Settings = review.DefaultSettings()
	if err := json.Unmarshal(b, &r); err != nil {
		return nil, fmt.Errorf("reading review record %s: %w", p, err)
	}
	if err := r.Settings.Validate(); err != nil {
		return nil, fmt.Errorf("review record %s: %w", p, err)
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

// legacySettings is the layout of the settings in the window's
// preferences and review records before they became review.Settings.
type legacySettings struct {
	Threshold      float64      `json:"threshold"`
	MarginMM       float64      `json:"margin_mm"`
	Model          string       `json:"model"`
	CEM43Break     float64      `json:"cem43_break_c"`
	CEM43RAbove    float64      `json:"cem43_r_above"`
	CEM43RBelow    float64      `json:"cem43_r_below"`
	ArrheniusSet   string       `json:"arrhenius_set"`
	ArrheniusA     float64      `json:"arrhenius_a"`
	ArrheniusEa    float64      `json:"arrhenius_ea"`
	PRFAlpha       float64      `json:"prf_alpha_ppm_per_c"`
	BodyTemp       float64      `json:"body_temp_c"`
	BaselineFrames int          `json:"baseline_frames"`
	Drift          string       `json:"drift"`
	DriftOrder     int          `json:"drift_order"`
	PhaseScale     float64      `json:"phase_scale"`
	B0             float64      `json:"b0_t"`
	TEms           float64      `json:"te_ms"`
	Trials         int          `json:"trials"`
	DriftRef       *review.Rect `json:"drift_reference,omitempty"`
	Excluded       []int        `json:"excluded,omitempty"`
}

// readLegacySettings converts settings of the earlier layout; fields it
// did not have (seed, phase sign, quality thresholds, time rule) take
// their defaults, as they did then.
func readLegacySettings(js []byte) (review.Settings, error) {
	var l legacySettings
	if err := json.Unmarshal(js, &l); err != nil {
		return review.Settings{}, fmt.Errorf("settings of the earlier layout: %w", err)
	}
	s := review.DefaultSettings()
	s.Threshold, s.MarginMM, s.Trials = l.Threshold, l.MarginMM, l.Trials
	s.Model = review.Model(l.Model)
	s.Excluded = l.Excluded
	if l.CEM43RAbove > 0 && l.CEM43RBelow > 0 {
		s.CEM43.Break, s.CEM43.RAbove, s.CEM43.RBelow = l.CEM43Break, l.CEM43RAbove, l.CEM43RBelow
	}
	if l.ArrheniusA > 0 && l.ArrheniusEa > 0 {
		s.Arrhenius.A, s.Arrhenius.Ea = l.ArrheniusA, l.ArrheniusEa
		s.Arrhenius.Tissue, s.Arrhenius.Source = l.ArrheniusSet, "entered by the user"
		if set, ok := dosemap.ArrheniusSet(l.ArrheniusSet); ok && set.A == l.ArrheniusA && set.Ea == l.ArrheniusEa {
			s.Arrhenius = set
		}
	}
	t := &s.Thermometry
	if l.PRFAlpha != 0 {
		t.AlphaPPMPerC = l.PRFAlpha
	}
	if l.BodyTemp > 0 {
		t.BodyTempC = l.BodyTemp
	}
	if l.BaselineFrames > 0 {
		t.BaselineFrames = l.BaselineFrames
	}
	t.PhaseScale, t.B0T, t.TEms, t.DriftReference = l.PhaseScale, l.B0, l.TEms, l.DriftRef
	switch l.Drift {
	case "none":
		t.Drift = dosemap.DriftNone
	case "polynomial":
		t.Drift, t.DriftOrder = dosemap.DriftPolynomial, min(l.DriftOrder, review.MaxDriftOrder)
	default: // the earlier window's default
		t.Drift = dosemap.DriftMean
	}
	if err := s.Validate(); err != nil {
		return s, fmt.Errorf("settings of the earlier layout: %w", err)
	}
	return s, nil
}

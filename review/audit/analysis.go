package audit

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"dosecover/dosemap"
	"dosecover/dosemap/deid"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/safefile"
	"dosecover/review"
)

// LoadSettings reads analysis settings for an audit from a JSON file in
// the layout of a Result's "settings" object (review.ReadSettings): keys
// left out keep their defaults (review.DefaultSettings) and unknown keys
// are rejected. An empty path gives the defaults. The settings must suit
// an audit (CheckSettings).
func LoadSettings(path string) (review.Settings, error) {
	if path == "" {
		return review.DefaultSettings(), nil
	}
	f, err := os.Open(path)
	if err != nil {
		return review.DefaultSettings(), &safefile.PathError{What: "settings file", Path: path, Err: err}
	}
	defer f.Close()
	s, err := review.ReadSettings(f, path, review.DefaultSettings())
	if err != nil {
		return s, err
	}
	if err := CheckSettings(s); err != nil {
		return s, fmt.Errorf("settings file %s: %w", path, err)
	}
	return s, nil
}

// CheckSettings reports settings an audit cannot use: invalid ones
// (review.Settings.Validate), and those that name parts of one case —
// excluded sonications or a drawn drift reference — while an audit
// applies one set of settings to every case.
func CheckSettings(s review.Settings) error {
	if err := s.Validate(); err != nil {
		return err
	}
	switch {
	case len(s.Excluded) > 0:
		return errors.New("excluded_sonications names sonications of one case; an audit analyses every sonication of every case")
	case s.Thermometry.DriftReference != nil:
		return errors.New("thermometry.drift_reference is a region drawn on one case; an audit uses each case's automatic reference region")
	}
	return nil
}

// SettingsColumns returns the settings columns of the summary table; the
// records hold every setting and their hash.
func SettingsColumns(s review.Settings) []Column {
	f := func(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }
	return []Column{
		{"model", string(s.Model)},
		{"threshold", f(s.Threshold)},
		{"margin_mm", f(s.MarginMM)},
		{"trials", strconv.Itoa(s.Trials)},
		{"seed", strconv.FormatUint(s.Seed, 10)},
	}
}

// Artifacts makes the report files of one analysed case (for example
// ReportArtifacts); an error fails the case.
type Artifacts func(c *Case, cs *dosemap.Case, res *review.Result) ([]Artifact, error)

// NewAnalyzer returns the Analyzer of the coverage analysis (package
// review) with settings s. Per case it reads the folder with
// review.LoadAndAnalyze, one file at a time (the audit's workers run cases
// in parallel), and on the way:
//   - fails the case when a file that is DICOM (by content) or named *.dcm
//     could not be read: a corrupted file must not silently shorten a
//     series;
//   - marks it incomplete when it lacks thermometry or a target contour;
//   - else analyses it with review.Analyze and returns its figures, the
//     Result JSON and the files made by artifacts (nil: none).
//
// With Case.Deidentify the case's patient attributes are dropped and its
// label is the case ID before the analysis sees it.
func NewAnalyzer(s review.Settings, artifacts Artifacts) Analyzer {
	return func(ctx context.Context, c *Case) (_ *CaseResult, err error) {
		var patient dosemap.Patient
		if c.Deidentify {
			// The reasons of a de-identified case are blanked of the
			// patient's values (run.go also hides the paths).
			defer func() {
				if err != nil {
					err = blankError(err, patient)
				}
			}()
		}
		cs, _, res, err := review.LoadAndAnalyze(ctx, c.Dir, s, review.LoadOptions{Workers: 1, Study: c.Study,
			Check: func(cs *dosemap.Case, inv *dicomio.Inventory) error {
				patient = cs.Patient
				if err := corrupted(c, inv); err != nil {
					return err
				}
				if c.Deidentify {
					// Identity leaves the case before anything is written
					// or said about it: structure names ("<surname>
					// tumour") are blanked of the patient's values,
					// sonications are named by number (their labels come
					// from series descriptions), and the patient
					// attributes are dropped.
					p := cs.Patient
					for n := range cs.Structures {
						cs.Structures[n].Name = deid.Blank(cs.Structures[n].Name, p.Name, p.ID, p.BirthDate, p.Institution)
					}
					for _, so := range cs.Sonications {
						so.Label = fmt.Sprintf("sonication %d", so.Number)
					}
					cs.Patient = dosemap.Patient{}
					cs.Label = c.ID
				}
				if !inv.Reviewable {
					return Incomplete(inv.NotReviewable)
				}
				if cs.Target() == nil {
					if len(cs.Structures) == 0 {
						return Incomplete("no contours: no RTSTRUCT with a target structure found")
					}
					names := make([]string, len(cs.Structures))
					for n, st := range cs.Structures {
						names[n] = fmt.Sprintf("%q (%s)", st.Name, st.InterpretedType)
					}
					return Incomplete("no target contour among the structures " + strings.Join(names, ", "))
				}
				return nil
			}})
		if err != nil {
			return nil, err
		}
		var js bytes.Buffer
		if err := res.WriteJSON(&js); err != nil {
			return nil, fmt.Errorf("encoding the analysis of %s: %w", c.Dir, err)
		}
		out := &CaseResult{Metrics: MetricsOf(res), Flags: FlagsOf(res), Analysis: js.Bytes()}
		if artifacts != nil {
			if out.Artifacts, err = artifacts(c, cs, res); err != nil {
				return nil, fmt.Errorf("making the report of %s: %w", c.Dir, err)
			}
		}
		return out, nil
	}
}

// corrupted returns an error naming the first file of the case that looks
// like DICOM (by content or by a .dcm name) but could not be read.
func corrupted(c *Case, inv *dicomio.Inventory) error {
	var bad []string
	for _, sk := range inv.Skipped {
		r := sk.Reason
		broken := strings.HasPrefix(r, "unreadable") || strings.HasPrefix(r, "truncated") ||
			strings.HasPrefix(r, "cannot read") || strings.HasPrefix(r, "pixel data") || strings.HasPrefix(r, "not a DICOM file")
		if !broken {
			continue
		}
		p := sk.Path
		if !filepath.IsAbs(p) {
			p = filepath.Join(c.Dir, p)
		}
		isDCM := strings.EqualFold(filepath.Ext(p), ".dcm")
		if ok, _ := IsDICOMFile(p); ok || isDCM {
			bad = append(bad, fmt.Sprintf("%s: %s", p, r))
		}
	}
	switch len(bad) {
	case 0:
		return nil
	case 1:
		return fmt.Errorf("cannot use file %s", bad[0])
	}
	return fmt.Errorf("cannot use file %s (and %d more)", bad[0], len(bad)-1)
}

// MetricsOf returns the summary figures of a Result: fractions in percent,
// volumes in mL.
func MetricsOf(r *review.Result) Metrics {
	pct := func(f float64) Num { return Num(100 * f) }
	optPct := func(f *float64) Num {
		if f == nil {
			return Num(math.NaN())
		}
		return pct(*f)
	}
	m := Metrics{
		TargetML:            Num(r.TargetVolumeML),
		CoveragePct:         optPct(r.CoveredFraction), // null: nothing of the target monitored
		CoverageOfTargetPct: pct(r.CoveredFractionOfTarget),
		CoverageP05Pct:      optPct(r.CoveredFractionP05),
		CoverageP95Pct:      optPct(r.CoveredFractionP95),
		NotMonitoredPct:     pct(r.NotMonitoredFraction),
		Holes:               len(r.Holes),
		LargestHoleML:       0,
		OutsideMarginML:     Num(r.OutsideMarginLethalML),
	}
	for _, h := range r.Holes {
		m.LargestHoleML = Num(math.Max(float64(m.LargestHoleML), h.VolumeMM3/1000))
	}
	var avoid float64
	for _, a := range r.Avoid {
		avoid += a.LethalVolumeMM3 / 1000
	}
	m.AvoidLethalML = Num(avoid)
	return m
}

// FlagsOf returns the quality remarks of a Result: sonications with
// flagged thermometry frames or more drift removed than the settings'
// drift_flag_c, then the analysis warnings.
func FlagsOf(r *review.Result) []string {
	flags := []string{}
	for _, q := range r.Quality {
		if len(q.FlaggedFrames) > 0 {
			flags = append(flags, fmt.Sprintf("sonication %d: %d of %d frames flagged", q.Sonication, len(q.FlaggedFrames), len(q.Frames)))
		}
		if q.DriftFlagged(r.Settings.DriftFlagC) {
			flags = append(flags, fmt.Sprintf("sonication %d: drift %.2f °C removed, above %g °C", q.Sonication, math.Abs(q.MaxDriftC), r.Settings.DriftFlagC))
		}
	}
	return append(flags, r.Warnings...)
}

// blankError returns err with the identifying values of p blanked out of
// its text (an incomplete case stays incomplete).
func blankError(err error, p dosemap.Patient) error {
	var inc *IncompleteError
	if errors.As(err, &inc) {
		return Incomplete(deid.Blank(inc.Reason, p.Name, p.ID, p.BirthDate, p.Institution))
	}
	return errors.New(deid.Blank(err.Error(), p.Name, p.ID, p.BirthDate, p.Institution))
}

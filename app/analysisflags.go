package main

import (
	"errors"
	"flag"
	"fmt"
	"strconv"
	"strings"

	"dosecover/dosemap"
	"dosecover/review"
)

// analysisFlags are the options every command that analyses cases takes
// (analyze, report, audit), so that they give the same numbers for the
// same options: --settings FILE (the layout of a result's "settings") and
// one option for each common setting, which overrides the file. Register
// them with addAnalysisFlags and read them, after parsing, with settings.
type analysisFlags struct {
	fs                 *flag.FlagSet
	file               string
	threshold, margin  float64
	model, exclude     string
	trials             int
	seed               uint64
	alpha, bodyTemp    float64
	baseline, order    int
	drift, rule        string
	b0, te, phaseScale float64
	carryOver          bool
	residualWarn       float64
	focalLength        float64
	driftFlag          float64
}

// addAnalysisFlags registers --settings and the options of the common
// settings on fs; the defaults shown are review.DefaultSettings.
func addAnalysisFlags(fs *flag.FlagSet) *analysisFlags {
	d := review.DefaultSettings()
	t := d.Thermometry
	a := &analysisFlags{fs: fs}
	fs.StringVar(&a.file, "settings", "", "analysis settings as a JSON `FILE` in the layout of a result's \"settings\" (keys left out keep their defaults; the options below override it)")
	fs.Float64Var(&a.threshold, "threshold", 0, fmt.Sprintf("lethal threshold in the model's unit (0: the model's default; %g CEM43 min for cem43, %g for arrhenius)", review.ModelCEM43.DefaultThreshold(), review.ModelArrhenius.DefaultThreshold()))
	fs.Float64Var(&a.margin, "margin", d.MarginMM, "safety margin around the target, mm")
	fs.StringVar(&a.model, "model", string(d.Model), "dose model: cem43 or arrhenius")
	fs.StringVar(&a.exclude, "exclude", "", "sonication numbers to leave out of the cumulative dose, comma-separated")
	fs.IntVar(&a.trials, "trials", d.Trials, "Monte Carlo trials for the uncertainty band (0: none)")
	fs.Uint64Var(&a.seed, "seed", d.Seed, "Monte Carlo seed")
	fs.StringVar(&a.rule, "rule", d.CEM43.Rule.String(), "time integration of the dose: trapezoid or rectangle")
	fs.BoolVar(&a.carryOver, "carry-over", d.CarryOver, "add the estimated heat left from earlier sonications to each sonication's temperatures before dose (the as-measured coverage is given beside)")
	fs.Float64Var(&a.residualWarn, "residual-warn", d.ResidualWarnC, "warn of sonications starting on more estimated residual heat than this, °C")
	fs.Float64Var(&a.alpha, "alpha", t.AlphaPPMPerC, "PRF thermal coefficient α, ppm/°C (negative)")
	fs.Float64Var(&a.bodyTemp, "body-temp", t.BodyTempC, "tissue temperature during the baseline frames, °C")
	fs.IntVar(&a.baseline, "baseline-frames", t.BaselineFrames, "frames before heating averaged as the phase reference")
	fs.StringVar(&a.drift, "drift", t.Drift.String(), "drift correction: none, mean or polynomial")
	fs.IntVar(&a.order, "drift-order", t.DriftOrder, fmt.Sprintf("order of the polynomial drift fit, 0 to %d", review.MaxDriftOrder))
	fs.Float64Var(&a.b0, "b0", t.B0T, "main field B0, T (0: each series' own)")
	fs.Float64Var(&a.te, "te", t.TEms, "echo time TE, ms (0: each series' own)")
	fs.Float64Var(&a.phaseScale, "phase-scale", t.PhaseScale, "phase per stored unit, rad (0: from the files' tags)")
	fs.Float64Var(&a.focalLength, "focal-length", d.FocalLengthMM, "length of a sonication's heating along the beam, mm, for the monitoring rule (0: the longest extent each sonication measured)")
	fs.Float64Var(&a.driftFlag, "drift-flag", d.DriftFlagC, "flag sonications with more drift removed than this, °C")
	return a
}

// flagKeys maps each option onto the JSON key of the setting it sets, so
// that a refusal by review.Settings.Validate names the option.
var flagKeys = map[string]string{
	"threshold": "threshold", "margin": "margin_mm", "trials": "trials",
	"alpha": "thermometry.alpha_ppm_per_c", "body-temp": "thermometry.body_temp_c",
	"baseline-frames": "thermometry.baseline_frames", "drift-order": "thermometry.drift_order",
	"b0": "thermometry.b0_t", "te": "thermometry.te_ms", "phase-scale": "thermometry.phase_scale_rad",
	"residual-warn": "residual_warn_c",
	"focal-length":  "focal_length_mm", "drift-flag": "drift_flag_c",
}

// settings returns the analysis settings asked for: the settings file (or
// review.DefaultSettings) with the options given on top. A settings file
// that cannot be read or used is a *settingsFileError; anything else is a
// usage error.
func (a *analysisFlags) settings() (review.Settings, error) {
	s := review.DefaultSettings()
	if a.file != "" {
		f, err := review.LoadSettings(a.file)
		if err != nil {
			return s, &settingsFileError{err}
		}
		s = f
	}
	set := map[string]bool{}
	a.fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	if set["model"] {
		m, err := review.ParseModel(a.model)
		if err != nil {
			return s, fmt.Errorf("--model %q: want cem43 or arrhenius", a.model)
		}
		if m != s.Model {
			s.Model, s.Threshold = m, m.DefaultThreshold()
		}
	}
	if set["threshold"] && a.threshold != 0 {
		s.Threshold = a.threshold
	}
	if set["margin"] {
		s.MarginMM = a.margin
	}
	if set["trials"] {
		s.Trials = a.trials
	}
	if set["seed"] {
		s.Seed = a.seed
	}
	if set["carry-over"] {
		s.CarryOver = a.carryOver
	}
	if set["residual-warn"] {
		s.ResidualWarnC = a.residualWarn
	}
	if set["focal-length"] {
		s.FocalLengthMM = a.focalLength
	}
	if set["drift-flag"] {
		s.DriftFlagC = a.driftFlag
	}
	if set["rule"] {
		r, err := dosemap.ParseTimeRule(a.rule)
		if err != nil {
			return s, fmt.Errorf("--rule %q: want trapezoid or rectangle", a.rule)
		}
		s.CEM43.Rule, s.Arrhenius.Rule = r, r
	}
	t := &s.Thermometry
	if set["drift"] {
		d, err := dosemap.ParseDriftMethod(a.drift)
		if err != nil {
			return s, fmt.Errorf("--drift %q: want none, mean or polynomial", a.drift)
		}
		t.Drift = d
	}
	for _, f := range []struct {
		name     string
		dst, src *float64
	}{
		{"alpha", &t.AlphaPPMPerC, &a.alpha}, {"body-temp", &t.BodyTempC, &a.bodyTemp},
		{"b0", &t.B0T, &a.b0}, {"te", &t.TEms, &a.te}, {"phase-scale", &t.PhaseScale, &a.phaseScale},
	} {
		if set[f.name] {
			*f.dst = *f.src
		}
	}
	if set["baseline-frames"] {
		t.BaselineFrames = a.baseline
	}
	if set["drift-order"] {
		t.DriftOrder = a.order
	}
	if set["exclude"] {
		s.Excluded = nil
		for _, f := range strings.FieldsFunc(a.exclude, func(r rune) bool { return r == ',' || r == ' ' }) {
			n, err := strconv.Atoi(f)
			if err != nil || n < 1 {
				return s, fmt.Errorf("--exclude %q: %q is not a sonication number", a.exclude, f)
			}
			s.Excluded = append(s.Excluded, n)
		}
	}
	if err := s.Validate(); err != nil {
		msg := err.Error()
		for name, key := range flagKeys {
			if set[name] && strings.HasPrefix(msg, key+" ") {
				return s, fmt.Errorf("--%s%s", name, msg[len(key):])
			}
		}
		if set["exclude"] && strings.HasPrefix(msg, "excluded_sonications") {
			return s, fmt.Errorf("--exclude %q%s", a.exclude, msg[len("excluded_sonications"):])
		}
		if a.file != "" {
			return s, fmt.Errorf("settings file %s with the options given: %w", a.file, err)
		}
		return s, err
	}
	return s, nil
}

// settingsFileError is a settings file that could not be read or used: a
// failed input (exit code 1), not a usage error.
type settingsFileError struct{ err error }

func (e *settingsFileError) Error() string { return e.err.Error() }
func (e *settingsFileError) Unwrap() error { return e.err }

// settingsExitCode is the exit code for an error of analysisFlags.settings.
func settingsExitCode(err error) int {
	var fe *settingsFileError
	if errors.As(err, &fe) {
		return exitFailure
	}
	return exitUsage
}

// structureFlags choose the structures of an analysis: a dosecover contour
// file instead of the case's own structures, and which structure is the
// target.
type structureFlags struct {
	contours string
	target   string
}

// addStructureFlags registers --contours and --target on fs.
func addStructureFlags(fs *flag.FlagSet) *structureFlags {
	s := &structureFlags{}
	fs.StringVar(&s.contours, "contours", "", "dosecover contour `FILE` to use instead of the case's structures")
	fs.StringVar(&s.target, "target", "", "`NAME` of the structure to analyse as the target")
	return s
}

// apply replaces the structures of c by the contour file and marks the
// named target; the error names the file or lists the structures.
func (s *structureFlags) apply(c *dosemap.Case) error {
	if s.contours != "" {
		ss, _, err := review.ReadContourFile(s.contours)
		if err != nil {
			return err
		}
		c.Structures = ss
	}
	if s.target == "" {
		return nil
	}
	found := false
	for n := range c.Structures {
		st := &c.Structures[n]
		switch {
		case st.Name == s.target:
			st.Role, found = dosemap.RoleTarget, true
		case st.Role == dosemap.RoleTarget:
			st.Role = dosemap.RoleOther
		}
	}
	if !found {
		var names []string
		for _, st := range c.Structures {
			names = append(names, strconv.Quote(st.Name))
		}
		return fmt.Errorf("no structure named %q (structures: %s)", s.target, strings.Join(names, ", "))
	}
	return nil
}

// addStudyFlag registers --study on fs: the StudyInstanceUID of the study
// to read from a folder that holds several (a review never mixes studies).
func addStudyFlag(fs *flag.FlagSet) *string {
	return fs.String("study", "", "`UID` (StudyInstanceUID) of the study to read when the folder holds several; dosecover inspect lists them")
}

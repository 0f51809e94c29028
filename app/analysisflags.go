//go:build cgo

package main

import (
	"flag"
	"fmt"
	"strconv"
	"strings"

	"dosecover/dosemap"
	"dosecover/review"
)

// analysisFlags are the options every command that analyses a case takes
// (analyze, report), so that they give the same numbers for the same
// options. Register them with addAnalysisFlags and read them with settings.
type analysisFlags struct {
	threshold float64
	margin    float64
	model     string
	exclude   string
	trials    int
	seed      uint64
}

// addAnalysisFlags registers --threshold, --margin, --model, --exclude,
// --trials and --seed on fs with review.DefaultSettings as defaults.
func addAnalysisFlags(fs *flag.FlagSet) *analysisFlags {
	d := review.DefaultSettings()
	a := &analysisFlags{}
	fs.Float64Var(&a.threshold, "threshold", 0, fmt.Sprintf("lethal threshold in the model's unit (0: the model's default; %g CEM43 min for cem43, 1 for arrhenius)", d.Threshold))
	fs.Float64Var(&a.margin, "margin", d.MarginMM, "safety margin around the target, mm")
	fs.StringVar(&a.model, "model", d.Model, "dose model: cem43 or arrhenius")
	fs.StringVar(&a.exclude, "exclude", "", "sonication numbers to leave out of the cumulative dose, comma-separated")
	fs.IntVar(&a.trials, "trials", d.Trials, "Monte Carlo trials for the uncertainty band (0: none)")
	fs.Uint64Var(&a.seed, "seed", d.Seed, "Monte Carlo seed")
	return a
}

// settings returns the analysis settings the flags ask for, or a usage
// error.
func (a *analysisFlags) settings() (review.Settings, error) {
	s := review.DefaultSettings()
	s.Model = strings.ToLower(strings.TrimSpace(a.model))
	switch s.Model {
	case "cem43":
		s.Threshold = 240
	case "arrhenius":
		s.Threshold = 1 // Ω = 1 (Henriques & Moritz 1947)
	default:
		return s, fmt.Errorf("--model %q: want cem43 or arrhenius", a.model)
	}
	if a.threshold != 0 {
		if !(a.threshold > 0) {
			return s, fmt.Errorf("--threshold %g: must be positive", a.threshold)
		}
		s.Threshold = a.threshold
	}
	if !(a.margin >= 0) || a.margin > review.LargestMarginMM {
		return s, fmt.Errorf("--margin %g: want 0 to %g mm", a.margin, review.LargestMarginMM)
	}
	s.MarginMM = a.margin
	if a.trials < 0 || a.trials > review.MaxTrials {
		return s, fmt.Errorf("--trials %d: want 0 to %d", a.trials, review.MaxTrials)
	}
	s.Trials, s.Seed = a.trials, a.seed
	for _, f := range strings.FieldsFunc(a.exclude, func(r rune) bool { return r == ',' || r == ' ' }) {
		n, err := strconv.Atoi(f)
		if err != nil || n < 1 {
			return s, fmt.Errorf("--exclude %q: %q is not a sonication number", a.exclude, f)
		}
		s.Excluded = append(s.Excluded, n)
	}
	return s, nil
}

// parseArgs parses fs over args, which may mix options and positional
// arguments in any order, and returns the positional ones. A parse error
// has been reported by fs already.
func parseArgs(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	rest := args
	for {
		if err := fs.Parse(rest); err != nil {
			return nil, err
		}
		rest = fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		if rest[0] == "--" {
			return append(pos, rest[1:]...), nil
		}
		pos, rest = append(pos, rest[0]), rest[1:]
	}
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

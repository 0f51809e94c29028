package review

import (
	"context"
	"fmt"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
)

// LoadOptions are the choices of LoadCase and LoadAndAnalyze that are not
// analysis settings.
type LoadOptions struct {
	// Study chooses the study of a folder that holds several, by
	// StudyInstanceUID (dicomio.LoadOptions.Study); "" for a folder of one.
	Study string
	// Workers is the number of files read at once; 0: one per CPU core.
	Workers int
	// Resident reads every frame into memory; otherwise the phase and
	// magnitude frames stay in their files until the thermometry needs
	// them (dicomio.LoadOptions.Deferred), which holds one sonication's
	// frames at a time.
	Resident bool
	// Progress, when not nil, receives the files done and the total of
	// each pass of the reader (attributes, then pixels).
	Progress func(done, total int)
	// Check, when not nil, sees the case and the reader's inventory
	// before the analysis and may change the case (its structures, its
	// label) or refuse it with an error, which LoadAndAnalyze returns as
	// it is.
	Check func(c *dosemap.Case, inv *dicomio.Inventory) error
}

// LoadCase reads the case folder dir as an analysis with s reads it (the
// phase scale of s.Thermometry). A case that is not reviewable is returned
// with what could be read; the inventory says why.
func LoadCase(ctx context.Context, dir string, s Settings, opt LoadOptions) (*dosemap.Case, *dicomio.Inventory, error) {
	return dicomio.Load(ctx, dir, dicomio.LoadOptions{PhaseScale: s.Thermometry.PhaseScale,
		Workers: opt.Workers, Deferred: !opt.Resident, Study: opt.Study}, opt.Progress)
}

// LoadAndAnalyze reads the case folder dir (LoadCase), refuses a folder
// that holds no reviewable case, lets opt.Check see and adjust the case,
// and analyses it with s: the one path from a folder to a Result that the
// commands and the audit share.
func LoadAndAnalyze(ctx context.Context, dir string, s Settings, opt LoadOptions) (*dosemap.Case, *dicomio.Inventory, *Result, error) {
	if err := s.complete().Validate(); err != nil {
		return nil, nil, nil, err
	}
	c, inv, err := LoadCase(ctx, dir, s, opt)
	if err != nil {
		return nil, inv, nil, fmt.Errorf("reading case folder %s: %w", dir, err)
	}
	if opt.Check != nil {
		if err := opt.Check(c, inv); err != nil {
			return c, inv, nil, err
		}
	}
	if inv != nil && !inv.Reviewable {
		return c, inv, nil, fmt.Errorf("%s cannot be analysed: %s", dir, inv.NotReviewable)
	}
	r, err := Analyze(ctx, c, s, nil)
	if err != nil {
		return c, inv, nil, fmt.Errorf("analysing %s: %w", dir, err)
	}
	return c, inv, r, nil
}

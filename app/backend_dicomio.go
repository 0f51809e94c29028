//go:build cgo

package main

import (
	"context"
	"fmt"
	"strings"

	"dosecover/review"
)

// The case reader: dosemap/dicomio.
func init() {
	readCase = readCaseDICOM
}

func readCaseDICOM(ctx context.Context, dir string, opt loadOptions, progress func(done, total int)) (*loadedCase, error) {
	// As the commands read: the frames stay in their files and are
	// decoded one sonication at a time when the thermometry needs them.
	set := review.DefaultSettings()
	set.Thermometry.PhaseScale = opt.PhaseScale
	c, inv, err := review.LoadCase(ctx, dir, set, review.LoadOptions{Study: opt.Study, Progress: progress})
	if err != nil {
		return nil, err
	}
	lc := &loadedCase{Dir: dir, Case: c}
	if inv != nil {
		lc.Study = inv.Study
		if inv.NeedsStudyChoice() {
			for _, s := range inv.Studies {
				desc := s.Description
				if desc == "" {
					desc = "no description"
				}
				where := "in " + s.Folder
				if s.Folder == "." {
					where = "in the folder itself"
				}
				lc.Studies = append(lc.Studies, studyChoice{UID: s.UID,
					Label: fmt.Sprintf("%s: %s; %d series, %d files %s", s.Label(), desc, s.Series, s.Files, where)})
			}
		}
		var b strings.Builder
		if err := inv.WriteText(&b); err == nil {
			lc.Inventory = b.String()
		}
		for _, s := range inv.Skipped {
			lc.Skipped = append(lc.Skipped, skippedFile{Path: s.Path, Reason: s.Reason})
		}
		lc.Problems = append(lc.Problems, inv.Problems...)
		if !inv.Reviewable {
			lc.NotReviewable = inv.NotReviewable
			if lc.NotReviewable == "" {
				lc.NotReviewable = "the reader found no reviewable case in it"
			}
		}
	}
	if c == nil {
		return nil, fmt.Errorf("reading %s: no case found", dir)
	}
	for _, s := range c.Sonications {
		if !s.HasPhase() {
			continue // temperature or dose maps need no scanner values
		}
		if s.B0 == 0 {
			lc.MissingB0 = true
		}
		if s.TE == 0 {
			lc.MissingTE = true
		}
	}
	return lc, nil
}

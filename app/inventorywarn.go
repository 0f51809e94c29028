package main

import (
	"context"
	"fmt"
	"io"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
	"dosecover/review"
)

// warnInventory prints the reader's warnings about the case (files not
// used, problems found) to w, prefixed with the command's name, so that an
// analysis of an incomplete case does not look complete.
func warnInventory(w io.Writer, cmd string, inv *dicomio.Inventory) {
	if inv == nil {
		return
	}
	for _, l := range inv.Warnings() {
		fmt.Fprintf(w, "dosecover %s: warning: %s\n", cmd, l)
	}
}

// loadAndAnalyze reads the case folder dir and runs the coverage analysis
// with set, as analyze and report both do: it stops on Ctrl-C, refuses a
// folder that holds no reviewable case, warns of files not used, and
// applies the structure options. study chooses the study of a folder that
// holds several (a folder of several and no choice is refused, each study
// named); the StudyInstanceUID of the study read is returned. On failure
// it prints the reason prefixed by "dosecover CMD:" and returns exit code 1.
func loadAndAnalyze(ctx context.Context, cmd, dir, study string, sf *structureFlags, set review.Settings, stderr io.Writer) (*dosemap.Case, *review.Result, string, int) {
	c, inv, r, err := review.LoadAndAnalyze(ctx, dir, set, review.LoadOptions{Study: study,
		Check: func(c *dosemap.Case, inv *dicomio.Inventory) error {
			if inv != nil && !inv.Reviewable {
				return fmt.Errorf("%s cannot be analysed: %s", dir, inv.NotReviewable)
			}
			warnInventory(stderr, cmd, inv)
			return sf.apply(c)
		},
	})
	if err != nil {
		fmt.Fprintf(stderr, "dosecover %s: %v\n", cmd, err)
		return nil, nil, "", exitFailure
	}
	uid := ""
	if inv != nil {
		uid = inv.Study
	}
	return c, r, uid, exitOK
}

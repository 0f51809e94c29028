//go:build cgo

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
	c, inv, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{Deferred: true, Study: study}, nil)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover %s: %v\n", cmd, err)
		return nil, nil, "", 1
	}
	if inv != nil && !inv.Reviewable {
		fmt.Fprintf(stderr, "dosecover %s: %s cannot be analysed: %s\n", cmd, dir, inv.NotReviewable)
		return nil, nil, "", 1
	}
	warnInventory(stderr, cmd, inv)
	if err := sf.apply(c); err != nil {
		fmt.Fprintf(stderr, "dosecover %s: %v\n", cmd, err)
		return nil, nil, "", 1
	}
	r, err := review.Analyze(ctx, c, set, nil)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover %s: analysing %s: %v\n", cmd, dir, err)
		return nil, nil, "", 1
	}
	uid := ""
	if inv != nil {
		uid = inv.Study
	}
	return c, r, uid, 0
}

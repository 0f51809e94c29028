package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"

	"dosecover/dosemap/safefile"
	"dosecover/review"
	"dosecover/review/report"
)

func init() {
	register(command{name: "analyze", summary: "measure the thermal-dose coverage of a case folder (covered fraction, holes, lethal dose outside the margin)", run: runAnalyze})
}

// runAnalyze implements
//
//	dosecover analyze CASE_DIR [--json FILE] [--threshold T] [--margin M]
//	    [--model cem43|arrhenius] [--exclude N,...] [--trials N] [--seed S]
//	    [--contours FILE] [--target NAME] [--study UID]
//
// It prints a summary of the figures and of the settings used; exit code 0
// when the analysis ran, 1 when it could not (reason printed), 2 for a
// usage error.
func runAnalyze(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("analyze", flag.ContinueOnError)
	fs.SetOutput(stderr)
	jsonPath := fs.String("json", "", "also write the full result as JSON to `FILE` (\"-\": to standard output instead of the summary)")
	sf := addStructureFlags(fs)
	af := addAnalysisFlags(fs)
	study := addStudyFlag(fs)
	deidentify := fs.Bool("deidentify", false, "hide identity in the outputs: neutral case label, sonications by number, patient identity blanked out of names and warnings")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: dosecover analyze CASE_DIR [--json FILE] [--threshold T] [--margin M] [--model cem43|arrhenius] [options]")
		fmt.Fprintln(stderr, "Reads the case folder (never changes it), computes temperature and thermal dose,")
		fmt.Fprintln(stderr, "and prints the covered fraction of the target, holes, lethal dose outside the")
		fmt.Fprintln(stderr, "margin and per-sonication figures, with the settings used.")
		fmt.Fprintln(stderr, "Exit status: 0 analysed, 1 could not analyse (reason given), 2 usage error.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return parseFailed(err)
	}
	if len(pos) != 1 {
		fmt.Fprintf(stderr, "dosecover analyze: one case folder expected, got %d arguments\n", len(pos))
		fs.Usage()
		return exitUsage
	}
	dir, code := caseFolder("analyze", pos[0], stderr) // a study on an archive comes through the cache
	if code != exitOK {
		return code
	}
	set, err := af.settings()
	if err != nil {
		fmt.Fprintf(stderr, "dosecover analyze: %v\n", err)
		return settingsExitCode(err)
	}
	if err := safefile.CheckDir("case folder", dir); err != nil {
		fmt.Fprintf(stderr, "dosecover analyze: %v\n", err)
		return exitFailure
	}
	if *jsonPath != "" && *jsonPath != "-" {
		// Refuse before any work.
		if err := review.WriteOutside(*jsonPath, dir, nil); err != nil {
			fmt.Fprintf(stderr, "dosecover analyze: cannot write %s: %v\n", *jsonPath, err)
			return exitFailure
		}
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	c, res, _, code := loadAndAnalyze(ctx, "analyze", dir, *study, sf, set, stderr)
	if code != 0 {
		return code
	}
	if *deidentify {
		sum, _, err := review.HashInputs(ctx, dir)
		if err != nil {
			fmt.Fprintf(stderr, "dosecover analyze: %v\n", err)
			return exitFailure
		}
		res = report.DeidentifyResult(c, res, report.DeidentifiedLabel(c.Label, sum))
	}
	switch *jsonPath {
	case "-":
		if err := res.WriteJSON(stdout); err != nil {
			fmt.Fprintf(stderr, "dosecover analyze: writing JSON: %v\n", err)
			return exitFailure
		}
		return exitOK
	case "":
	default:
		if err := review.WriteOutside(*jsonPath, dir, res.WriteJSON); err != nil {
			fmt.Fprintf(stderr, "dosecover analyze: writing %s: %v\n", *jsonPath, err)
			return exitFailure
		}
	}
	if err := res.WriteText(stdout); err != nil {
		fmt.Fprintf(stderr, "dosecover analyze: %v\n", err)
		return exitFailure
	}
	return exitOK
}

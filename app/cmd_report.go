package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"time"

	"dosecover/dosemap/safefile"
	"dosecover/review"
	"dosecover/review/report"
)

func init() {
	register(command{name: "report", summary: "write the one-page report (PNG, PDF) and metrics (JSON, CSV) of a case", run: runReport})
}

// runReport implements
//
//	dosecover report CASE_DIR -o report.png [--pdf report.pdf] [--json metrics.json]
//	    [--csv metrics.csv] [--deidentify] [analysis options] [--contours FILE] [--target NAME]
func runReport(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("report", flag.ContinueOnError)
	fs.SetOutput(stderr)
	png := fs.String("o", "", "the report page as PNG (required unless --pdf, --json or --csv is given)")
	pdf := fs.String("pdf", "", "also write the report as PDF")
	js := fs.String("json", "", "also write every metric as JSON")
	csv := fs.String("csv", "", "also write every metric as CSV (name,value,unit)")
	deidentify := fs.Bool("deidentify", false, "hide identity: neutral case label, no scan date, generic sonication labels")
	reviewer := fs.String("reviewer", "", "name of the reviewer, printed in the header")
	dpi := fs.Int("dpi", report.DefaultDPI, "resolution of the PNG, 150 to 1200 dots per inch")
	af := addAnalysisFlags(fs)
	study := addStudyFlag(fs)
	sf := addStructureFlags(fs)
	df := addDICOMResultFlags(fs)
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: dosecover report CASE_DIR -o report.png [--pdf report.pdf] [--json metrics.json] [--csv metrics.csv] [--deidentify] [options]")
		fmt.Fprintln(stderr, "Analyses the case as \"dosecover analyze\" does with the same options and writes the")
		fmt.Fprintln(stderr, "one-page A4 report. Nothing is written into CASE_DIR. No display is needed.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return parseFailed(err)
	}
	if len(pos) != 1 {
		fmt.Fprintf(stderr, "dosecover report: one case folder expected, got %d arguments\n", len(pos))
		fs.Usage()
		return exitUsage
	}
	dir, code := caseFolder("report", pos[0], stderr) // a study on an archive comes through the cache
	if code != exitOK {
		return code
	}
	out := report.Outputs{PNG: *png, PDF: *pdf, JSON: *js, CSV: *csv, DPI: *dpi}
	if out.PNG == "" && out.PDF == "" && out.JSON == "" && out.CSV == "" && !df.wanted() {
		fmt.Fprintln(stderr, "dosecover report: give at least one output (-o report.png, --pdf, --json, --csv, --dicom or --store)")
		return exitUsage
	}
	if *dpi < 150 || *dpi > 1200 {
		fmt.Fprintf(stderr, "dosecover report: --dpi %d: want 150 (legible in print) to 1200\n", *dpi)
		return exitUsage
	}
	set, err := af.settings()
	if err != nil {
		fmt.Fprintf(stderr, "dosecover report: %v\n", err)
		return settingsExitCode(err)
	}
	// Refuse outputs inside the case folder before any work.
	for _, p := range []string{out.PNG, out.PDF, out.JSON, out.CSV, df.checkPath()} {
		if p == "" {
			continue
		}
		if err := safefile.CheckOutside(dir, p); err != nil {
			fmt.Fprintf(stderr, "dosecover report: %v\n", err)
			return exitFailure
		}
		if err := safefile.CheckDir("output folder", filepath.Dir(p)); err != nil {
			fmt.Fprintf(stderr, "dosecover report: cannot write %s: %v\n", p, err)
			return exitFailure
		}
	}
	if *deidentify {
		stderr = hidePathsOf(stderr, dir) // names in the case folder may carry identity
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	c, r, studyUID, code := loadAndAnalyze(ctx, "report", dir, *study, sf, set, stderr)
	if code != 0 {
		return code
	}
	sum, _, err := review.HashInputs(ctx, dir)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover report: %v\n", err)
		return exitFailure
	}
	// The sign-offs made in the window on these very input files: the
	// report prints one only when it was made on this analysis.
	rec, err := loadRecord(sum)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover report: warning: %v; no sign-off is shown\n", err)
	}
	var signOffs []review.SignOff
	if rec != nil {
		signOffs = rec.SignOffs
	}
	px := report.PanelSize(float64(*dpi)).X // panels at the page's resolution
	in, err := report.FromResult(c, r, report.Options{
		Deidentify: *deidentify, Reviewer: *reviewer, SignOffs: signOffs, Study: studyUID,
		ReviewDate: time.Now().UTC().Truncate(time.Second), InputsSHA256: sum, PanelPixels: px,
	})
	if err != nil {
		fmt.Fprintf(stderr, "dosecover report: %v\n", err)
		return exitFailure
	}
	if out == (report.Outputs{DPI: out.DPI}) {
		// only DICOM results asked for
	} else if err := report.Write(in, dir, out); err != nil {
		fmt.Fprintf(stderr, "dosecover report: %v\n", err)
		return exitFailure
	}
	if code := df.write(dir, c, r, in, *deidentify, stdout, stderr); code != exitOK {
		return code
	}
	fmt.Fprintf(stdout, "%s: covered %s of the monitored target (%.1f %% of the whole target) at %g %s (margin %g mm)\n",
		in.CaseLabel, review.PercentText(r.CoveredFraction), 100*r.CoveredFractionOfTarget, r.Threshold, r.DoseUnit, r.MarginMM)
	for _, p := range []string{out.PNG, out.PDF, out.JSON, out.CSV} {
		if p != "" {
			fmt.Fprintf(stdout, "wrote %s\n", p)
		}
		if p != "" && p == out.PNG {
			for n := 2; n <= report.Pages(in); n++ {
				fmt.Fprintf(stdout, "wrote %s (page %d of %d)\n", report.PagePNG(p, n), n, report.Pages(in))
			}
		}
	}
	fmt.Fprintf(stdout, "sign-off: %s\n", orText(in.SignOff, "not signed off"))
	return exitOK
}

// orText returns s, or alt when s is empty.
func orText(s, alt string) string {
	if s == "" {
		return alt
	}
	return s
}

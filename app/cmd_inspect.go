package main

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"

	"dosecover/dosemap/dicomio"
)

func init() {
	register(command{name: "inspect", summary: "list what a case folder holds (series, sonications, structures, problems)", run: runInspect})
}

// runInspect implements "dosecover inspect DIR [--json]". Exit code 0 when
// the folder holds a reviewable case, 1 when not (the reason is printed), 2
// for a usage error.
func runInspect(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("inspect", flag.ContinueOnError)
	fs.SetOutput(stderr)
	asJSON := fs.Bool("json", false, "write the inventory as JSON instead of text")
	workers := fs.Int("workers", 0, "files read in parallel (0: one per CPU)")
	study := addStudyFlag(fs)
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: dosecover inspect DIR [--json] [--workers N] [--study UID]")
		fmt.Fprintln(stderr, "Reads every file under DIR (any depth, any names) without changing anything")
		fmt.Fprintln(stderr, "and lists the series, sonications, structures, skipped files and problems.")
		fmt.Fprintln(stderr, "Exit status: 0 reviewable case, 1 not reviewable (reason given), 2 usage error.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return parseFailed(err)
	}
	if len(pos) > 1 {
		fmt.Fprintf(stderr, "dosecover inspect: one folder expected, got %q and %q\n", pos[0], pos[1])
		fs.Usage()
		return exitUsage
	}
	if len(pos) == 0 {
		fs.Usage()
		return exitUsage
	}
	dir := pos[0]
	if *workers < 0 {
		fmt.Fprintln(stderr, "dosecover inspect: --workers must not be negative")
		return exitUsage
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	inv, err := dicomio.ScanOptions(ctx, dir, dicomio.LoadOptions{Workers: *workers, Study: *study}, nil)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover inspect: %v\n", err)
		return exitFailure
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(inv); err != nil {
			fmt.Fprintf(stderr, "dosecover inspect: writing JSON: %v\n", err)
			return exitFailure
		}
	} else if err := inv.WriteText(stdout); err != nil {
		fmt.Fprintf(stderr, "dosecover inspect: %v\n", err)
		return exitFailure
	}
	if !inv.Reviewable {
		fmt.Fprintf(stderr, "dosecover inspect: %s: not a reviewable case: %s\n", dir, inv.NotReviewable)
		return exitFailure
	}
	return exitOK
}

//go:build cgo

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
	// Accept the folder before or after the options.
	var dir string
	rest := args
	for len(rest) > 0 {
		if err := fs.Parse(rest); err != nil {
			return parseFailed(err)
		}
		rest = fs.Args()
		if len(rest) == 0 {
			break
		}
		if dir != "" {
			fmt.Fprintf(stderr, "dosecover inspect: one folder expected, got %q and %q\n", dir, rest[0])
			fs.Usage()
			return 2
		}
		dir, rest = rest[0], rest[1:]
	}
	if dir == "" {
		fs.Usage()
		return 2
	}
	if *workers < 0 {
		fmt.Fprintln(stderr, "dosecover inspect: --workers must not be negative")
		return 2
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	inv, err := dicomio.ScanOptions(ctx, dir, dicomio.LoadOptions{Workers: *workers, Study: *study}, nil)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover inspect: %v\n", err)
		return 1
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(inv); err != nil {
			fmt.Fprintf(stderr, "dosecover inspect: writing JSON: %v\n", err)
			return 1
		}
	} else if err := inv.WriteText(stdout); err != nil {
		fmt.Fprintf(stderr, "dosecover inspect: %v\n", err)
		return 1
	}
	if !inv.Reviewable {
		fmt.Fprintf(stderr, "dosecover inspect: %s: not a reviewable case: %s\n", dir, inv.NotReviewable)
		return 1
	}
	return 0
}

package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"dosecover/dosemap/safefile"
	"dosecover/dosemap/sim"
)

func init() {
	register(command{name: "demo", summary: "write the invented demo case (and more simulated cases) into a folder", run: runDemo})
}

// runDemo implements "dosecover demo DIR [--cases N] [--seed S]".
func runDemo(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("demo", flag.ContinueOnError)
	fs.SetOutput(stderr)
	cases := fs.Int("cases", 0, "also write `N` varied simulated cases into DIR/case-001 ...")
	seed := fs.Uint64("seed", 1, "`seed` of the varied cases (same seed, same files)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: dosecover demo DIR [--cases N] [--seed S]")
		fmt.Fprintln(stderr, "Writes the invented demo session (a gel phantom, no patient) into DIR/demo,")
		fmt.Fprintln(stderr, "with truth.json describing what was simulated. DIR must be new or empty.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return parseFailed(err)
	}
	if len(pos) != 1 {
		fs.Usage()
		return exitUsage
	}
	dir := pos[0]
	if *cases < 0 || *cases > 999 {
		fmt.Fprintf(stderr, "dosecover demo: --cases %d is outside 0..999\n", *cases)
		return exitUsage
	}
	if entries, err := os.ReadDir(dir); err == nil {
		if len(entries) > 0 {
			fmt.Fprintf(stderr, "dosecover demo: %s is not empty; choose a new or empty folder (nothing was written)\n", dir)
			return exitFailure
		}
	} else if !errors.Is(err, os.ErrNotExist) {
		fmt.Fprintf(stderr, "dosecover demo: %v\n", &safefile.PathError{What: "output folder", Path: dir, Err: err})
		return exitFailure
	}
	demo := filepath.Join(dir, "demo")
	t, err := sim.WriteDemo(demo)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover demo: %v\n", err)
		return exitFailure
	}
	fmt.Fprintf(stdout, "wrote %s: %d files, %d sonications (truth in %s)\n", demo, t.Files, len(t.Sonications), filepath.Join(demo, sim.TruthFile))
	if *cases > 0 {
		ts, err := sim.WriteCases(dir, *cases, *seed)
		if err != nil {
			fmt.Fprintf(stderr, "dosecover demo: %v\n", err)
			return exitFailure
		}
		fmt.Fprintf(stdout, "wrote %d simulated cases into %s (case-001 ..., seed %d)\n", len(ts), dir, *seed)
	}
	fmt.Fprintln(stdout, "All data are invented (phantom simulation). For review, QA and teaching only.")
	return exitOK
}

package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"

	"dosecover/review"
	"dosecover/review/audit"
)

func init() {
	register(command{
		name:    "audit",
		summary: "analyse many past cases with one set of settings: a table, a figure and a report per case",
		run:     runAudit,
	})
}

// auditAnalysis builds the per-case analysis of an audit with settings s.
// It returns the analysis, the settings as JSON (stored with every result;
// their hash, over every setting, decides --resume and the shard check)
// and the settings columns of the summary table.
var auditAnalysis = func(s review.Settings) (audit.Analyzer, []byte, []audit.Column, error) {
	if err := audit.CheckSettings(s); err != nil {
		return nil, nil, nil, err
	}
	return audit.NewAnalyzer(s, audit.ReportArtifacts), s.JSON(), audit.SettingsColumns(s), nil
}

func auditUsage(w io.Writer, fs *flag.FlagSet) {
	fmt.Fprintln(w, "usage: dosecover audit DIR... -o OUT_DIR [--settings FILE] [analysis options] [--workers N] [--resume] [--shard I/N] [--deidentify]")
	fmt.Fprintln(w, "       dosecover audit merge OUT_DIR   (joins the finished shards; see dosecover audit merge -h)")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Analyses every case below the folders DIR with the same settings and writes, into")
	fmt.Fprintln(w, "OUT_DIR, one record and one report per case (cases/ID/), summary.csv, errors.csv")
	fmt.Fprintln(w, "and summary.png. A folder holding DICOM files is one case; otherwise each of its")
	fmt.Fprintln(w, "subfolders holding DICOM files is one. OUT_DIR must not lie inside any DIR.")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Shards (--shard I/N) may share one OUT_DIR when they use the same settings: the")
	fmt.Fprintln(w, "first writes OUT_DIR/settings.json, and a shard with other settings is refused.")
	fmt.Fprintln(w, "Identified and de-identified (--deidentify) records never share an OUT_DIR.")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Exit code: 0 every case analysed; 1 some case incomplete or failed (see errors.csv),")
	fmt.Fprintln(w, "the audit interrupted, an input folder missing or unreadable, the settings file")
	fmt.Fprintln(w, "missing, unreadable or invalid, a shard refused for other settings, or OUT_DIR")
	fmt.Fprintln(w, "holding records of the other kind (identified or de-identified);")
	fmt.Fprintln(w, "2 usage error (unknown or bad options, no DIR or no -o, OUT_DIR inside a DIR).")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "options:")
	fs.SetOutput(w)
	fs.PrintDefaults()
}

func runAudit(args []string, stdout, stderr io.Writer) int {
	if len(args) > 0 && args[0] == "merge" {
		return runAuditMerge(args[1:], stdout, stderr)
	}
	fs := flag.NewFlagSet("audit", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	var cfg audit.Config
	var shard string
	fs.StringVar(&cfg.OutDir, "o", "", "output folder `OUT_DIR` (created when missing)")
	fs.StringVar(&cfg.OutDir, "out", "", "same as -o")
	af := addAnalysisFlags(fs)
	fs.IntVar(&cfg.Workers, "workers", 0, "cases analysed at once, and held in memory at once (0: one per CPU core)")
	fs.BoolVar(&cfg.Resume, "resume", false, "skip cases already analysed in OUT_DIR with the same inputs and settings")
	fs.StringVar(&shard, "shard", "", "analyse only shard `I/N` of the cases (1 <= I <= N; split by a hash of the case path)")
	fs.BoolVar(&cfg.Deidentify, "deidentify", false, "name cases by a pseudonym and leave patient identity and source paths out of every output")

	inputs, err := parseArgs(fs, args)
	if errors.Is(err, flag.ErrHelp) {
		auditUsage(stdout, fs)
		return exitOK
	}
	if err != nil {
		fmt.Fprintf(stderr, "dosecover audit: %v\n\n", err)
		auditUsage(stderr, fs)
		return exitUsage
	}
	if len(inputs) == 0 {
		fmt.Fprintln(stderr, "dosecover audit: no case folder given")
		auditUsage(stderr, fs)
		return exitUsage
	}
	if cfg.OutDir == "" {
		fmt.Fprintln(stderr, "dosecover audit: no output folder given (-o OUT_DIR)")
		auditUsage(stderr, fs)
		return exitUsage
	}
	if shard != "" {
		if cfg.Shard, err = audit.ParseShard(shard); err != nil {
			fmt.Fprintf(stderr, "dosecover audit: %v\n", err)
			return exitUsage
		}
	}
	if cfg.Workers < 0 {
		fmt.Fprintf(stderr, "dosecover audit: --workers %d: want 0 (one per core) or more\n", cfg.Workers)
		return exitUsage
	}
	for n, in := range inputs { // studies on an archive come through the cache
		var code int
		if inputs[n], code = caseFolder("audit", in, stderr); code != exitOK {
			return code
		}
	}
	cfg.Inputs = inputs
	set, err := af.settings()
	if err != nil {
		fmt.Fprintf(stderr, "dosecover audit: %v\n", err)
		return settingsExitCode(err)
	}
	cfg.Analyzer, cfg.Settings, cfg.SettingsColumns, err = auditAnalysis(set)
	if err != nil {
		// A settings file that cannot be read or used is a failed input,
		// like a case folder that cannot be read: exit 1.
		fmt.Fprintf(stderr, "dosecover audit: %v\n", err)
		return exitFailure
	}
	terminal := false
	if f, ok := stderr.(*os.File); ok {
		terminal = audit.IsTerminal(f)
	}
	cfg.Progress = audit.ProgressPrinter(stderr, terminal)

	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	finished := make(chan struct{})
	defer close(finished)
	go func() {
		select {
		case <-ctx.Done():
			select {
			case <-finished: // cancelled by the deferred stop: the audit is over
				return
			default:
			}
			// A second Ctrl-C ends the program at once; finished cases
			// stay saved (every file is written atomically).
			stop()
			fmt.Fprintln(stderr, "\ndosecover audit: stopping after the cases in progress (Ctrl-C again to quit at once)")
		case <-finished:
		}
	}()
	sum, err := audit.Run(ctx, cfg)
	var ue *audit.UsageError
	switch {
	case errors.As(err, &ue):
		fmt.Fprintf(stderr, "dosecover audit: %v\n", err)
		return exitUsage
	case sum != nil && sum.Interrupted:
		fmt.Fprintf(stderr, "\ndosecover audit: interrupted after %d cases; every finished case is saved in %s.\n"+
			"Run the same command with --resume to continue where it stopped.\n", len(sum.Rows), cfg.OutDir)
		return exitFailure
	case err != nil:
		fmt.Fprintf(stderr, "dosecover audit: %v\n", err)
		return exitFailure
	}
	for _, p := range sum.Problems {
		fmt.Fprintf(stderr, "dosecover audit: skipped folder: %s\n", p)
	}
	return printAuditSummary(stdout, sum)
}

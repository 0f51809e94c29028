package main

import (
	"errors"
	"flag"
	"fmt"
	"io"

	"dosecover/review/audit"
)

func auditMergeUsage(w io.Writer) {
	fmt.Fprintln(w, "usage: dosecover audit merge OUT_DIR")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Joins the shards of an audit (runs with --shard I/N into the same OUT_DIR) into")
	fmt.Fprintln(w, "summary.csv, errors.csv and summary.png, as a whole run over the same cases writes")
	fmt.Fprintln(w, "them. Refuses, writing nothing, when a shard of the N is missing, still running or")
	fmt.Fprintln(w, "stopped before its end (killed, node lost: run it again with --resume), or was made")
	fmt.Fprintln(w, "with other settings or another version of dosecover; the message names each.")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Exit code: 0 every case analysed; 1 some case incomplete or failed (see errors.csv),")
	fmt.Fprintln(w, "or the merge refused; 2 usage error. (To audit a case folder named merge, write ./merge.)")
}

// runAuditMerge runs "dosecover audit merge OUT_DIR".
func runAuditMerge(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("audit merge", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	err := fs.Parse(args)
	if errors.Is(err, flag.ErrHelp) {
		auditMergeUsage(stdout)
		return 0
	}
	if err != nil {
		fmt.Fprintf(stderr, "dosecover audit merge: %v\n\n", err)
		auditMergeUsage(stderr)
		return 2
	}
	if fs.NArg() != 1 {
		fmt.Fprintf(stderr, "dosecover audit merge: want one output folder, got %d arguments\n\n", fs.NArg())
		auditMergeUsage(stderr)
		return 2
	}
	sum, err := audit.Merge(fs.Arg(0))
	var ue *audit.UsageError
	switch {
	case errors.As(err, &ue):
		fmt.Fprintf(stderr, "dosecover audit merge: %v\n", err)
		return 2
	case err != nil:
		fmt.Fprintf(stderr, "dosecover audit merge: %v\n", err)
		return 1
	}
	return printAuditSummary(stdout, sum)
}

// printAuditSummary prints the case counts and the summary files of an
// audit (or a merge) and returns its exit code.
func printAuditSummary(stdout io.Writer, sum *audit.Summary) int {
	fmt.Fprintf(stdout, "%d cases: %d analysed (%d from an earlier run), %d incomplete, %d failed\n",
		len(sum.Rows), sum.Analysed, sum.Resumed, sum.Incomplete, sum.Failed)
	for _, f := range sum.Files {
		fmt.Fprintln(stdout, f)
	}
	if n := sum.Incomplete + sum.Failed; n > 0 {
		fmt.Fprintf(stdout, "%d cases were not analysed; their reasons are in errors.csv.\n", n)
	}
	return sum.ExitCode()
}

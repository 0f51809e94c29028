package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"

	"dosecover/dosemap/deid"
)

func init() {
	register(command{name: "deidentify", summary: "write a de-identified copy of a case folder for teaching", run: runDeidentify})
}

// runDeidentify implements "dosecover deidentify CASE_DIR OUT_DIR".
func runDeidentify(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("deidentify", flag.ContinueOnError)
	fs.SetOutput(stderr)
	dates := fs.String("dates", "shift", "dates: shift (by a per-case offset, times kept) or remove (dummy date "+deid.DummyDate+")")
	shift := fs.Int("shift-days", 0, "date offset in days for --dates shift (0: derived from the salt, between -3650 and -366)")
	salt := fs.String("salt", "", "secret keying the new UIDs, date offset and label (empty: random, so the copy cannot be linked back)")
	label := fs.String("label", "", "replacement patient name and ID (empty: TEACHING-<8 hex digits>)")
	study := addStudyFlag(fs)
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: dosecover deidentify CASE_DIR OUT_DIR [--dates shift|remove] [--shift-days N] [--salt S] [--label L] [--study UID]")
		fmt.Fprintln(stderr, "Writes a copy of every DICOM file of CASE_DIR into OUT_DIR (new or empty, not inside")
		fmt.Fprintln(stderr, "CASE_DIR) with identity removed: DICOM PS3.15 Annex E basic profile, UIDs replaced")
		fmt.Fprintln(stderr, "consistently, private attributes removed. Other files are not copied. CASE_DIR is not changed.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return parseFailed(err)
	}
	if len(pos) != 2 {
		fmt.Fprintf(stderr, "dosecover deidentify: CASE_DIR and OUT_DIR expected, got %d arguments\n", len(pos))
		fs.Usage()
		return exitUsage
	}
	mode, err := deid.ParseDateMode(*dates)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover deidentify: --dates: %v\n", err)
		return exitUsage
	}
	if *shift != 0 && mode != deid.DatesShift {
		fmt.Fprintln(stderr, "dosecover deidentify: --shift-days needs --dates shift")
		return exitUsage
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	res, err := deid.Folder(ctx, pos[0], pos[1], deid.Options{Salt: *salt, Dates: mode, ShiftDays: *shift, Label: *label, Study: *study}, nil)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover deidentify: %v\n", err)
		return exitFailure
	}
	fmt.Fprintf(stdout, "wrote %d de-identified DICOM files to %s\n", len(res.Files), pos[1])
	if res.Dates == deid.DatesShift {
		fmt.Fprintln(stdout, "dates shifted by a per-case offset (kept secret; times unchanged)")
	} else {
		fmt.Fprintf(stdout, "dates replaced by %s (times unchanged)\n", deid.DummyDate)
	}
	for _, s := range res.Skipped {
		fmt.Fprintf(stdout, "not copied: %s: %s\n", s.Path, s.Reason)
	}
	return exitOK
}

package main

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strings"
	"sync"
	"text/tabwriter"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/deid"
	"dosecover/dosemap/dicomweb"
	"dosecover/review"
	"dosecover/review/dicomout"
	"dosecover/review/report"
)

func init() {
	register(command{name: "archive", summary: "find and retrieve studies on a DICOMweb archive (find, get)", run: runArchive})
}

func archiveUsage(w io.Writer) {
	fmt.Fprintln(w, "usage: dosecover archive find URL [--patient ID] [--name TEXT] [--from DATE] [--to DATE] [--json] [--ca FILE]")
	fmt.Fprintln(w, "       dosecover archive get URL STUDY_UID -o DIR [--ca FILE]")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "URL is the DICOMweb root of the archive (e.g. https://archive.example/dicom-web).")
	fmt.Fprintln(w, "Credentials come from the environment, never the command line:")
	fmt.Fprintln(w, "  "+dicomweb.AuthEnv+"=user:password   (HTTP Basic) or")
	fmt.Fprintln(w, "  "+dicomweb.AuthEnv+"=\"Bearer TOKEN\"")
	fmt.Fprintln(w, "get writes one file per instance into DIR, named by its SOP Instance UID; a second")
	fmt.Fprintln(w, "run fetches only what is missing. Nothing on the archive changes.")
	fmt.Fprintln(w, "analyze, report and audit also take URL/studies/STUDY_UID: the study is retrieved")
	fmt.Fprintln(w, "into a cache folder (DOSECOVER_CACHE, default the user cache folder; 20 GB at most;")
	fmt.Fprintln(w, "extra authority for TLS from "+archiveCAEnv+").")
	fmt.Fprintln(w, "Exit status: 0 done, 1 failed (reason given), 2 usage error.")
}

// archiveCAEnv names a PEM file of extra certificate authorities for the
// archive when a command takes a study address (no --ca flag there).
const archiveCAEnv = "DOSECOVER_ARCHIVE_CA"

func runArchive(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		archiveUsage(stderr)
		return exitUsage
	}
	switch args[0] {
	case "find":
		return runArchiveFind(args[1:], stdout, stderr)
	case "get":
		return runArchiveGet(args[1:], stdout, stderr)
	case "-h", "--help", "help":
		archiveUsage(stdout)
		return exitOK
	}
	fmt.Fprintf(stderr, "dosecover archive: unknown action %q (want find or get)\n", args[0])
	archiveUsage(stderr)
	return exitUsage
}

// archiveClient returns a client for url with the credentials of the
// environment.
func archiveClient(url, ca string) (*dicomweb.Client, error) {
	return dicomweb.New(url, dicomweb.Options{Auth: os.Getenv(dicomweb.AuthEnv), CAFile: ca})
}

// checkDate accepts YYYYMMDD or YYYY-MM-DD and returns YYYYMMDD.
func checkDate(flagName, s string) (string, error) {
	if s == "" {
		return "", nil
	}
	for _, layout := range []string{"20060102", "2006-01-02"} {
		if t, err := time.Parse(layout, s); err == nil {
			return t.Format("20060102"), nil
		}
	}
	return "", fmt.Errorf("--%s %q: want a date as YYYY-MM-DD or YYYYMMDD", flagName, s)
}

func runArchiveFind(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("archive find", flag.ContinueOnError)
	fs.SetOutput(stderr)
	var q dicomweb.Query
	fs.StringVar(&q.PatientID, "patient", "", "patient `ID` (exact)")
	fs.StringVar(&q.Name, "name", "", "part of the patient's name")
	from := fs.String("from", "", "first study `DATE` (YYYY-MM-DD)")
	to := fs.String("to", "", "last study `DATE` (YYYY-MM-DD)")
	asJSON := fs.Bool("json", false, "print the studies as JSON")
	ca := fs.String("ca", "", "PEM `FILE` of extra certificate authorities for TLS")
	fs.Usage = func() { archiveUsage(stderr); fs.PrintDefaults() }
	pos, err := parseArgs(fs, args)
	if err != nil {
		return parseFailed(err)
	}
	if len(pos) != 1 {
		fmt.Fprintf(stderr, "dosecover archive find: one archive URL expected, got %d arguments\n", len(pos))
		return exitUsage
	}
	if q.From, err = checkDate("from", *from); err == nil {
		q.To, err = checkDate("to", *to)
	}
	if err != nil {
		fmt.Fprintf(stderr, "dosecover archive find: %v\n", err)
		return exitUsage
	}
	c, err := archiveClient(pos[0], *ca)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover archive find: %v\n", err)
		return exitFailure
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	studies, err := c.FindStudies(ctx, q)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover archive find: %v\n", err)
		return exitFailure
	}
	if *asJSON {
		enc := json.NewEncoder(stdout)
		enc.SetIndent("", "  ")
		if studies == nil {
			studies = []dicomweb.Study{}
		}
		if err := enc.Encode(studies); err != nil {
			fmt.Fprintf(stderr, "dosecover archive find: %v\n", err)
			return exitFailure
		}
		return exitOK
	}
	if len(studies) == 0 {
		fmt.Fprintf(stdout, "no study on %s matches\n", c)
		return exitOK
	}
	tw := tabwriter.NewWriter(stdout, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "STUDY UID\tPATIENT ID\tPATIENT\tDATE\tDESCRIPTION\tMODALITIES\tSERIES\tINSTANCES")
	for _, s := range studies {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%d\t%d\n", s.UID, s.PatientID, s.PatientName, s.Date,
			s.Description, strings.Join(s.Modalities, ","), s.Series, s.Instances)
	}
	tw.Flush()
	return exitOK
}

func runArchiveGet(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("archive get", flag.ContinueOnError)
	fs.SetOutput(stderr)
	out := fs.String("o", "", "folder `DIR` to retrieve into (created when missing)")
	ca := fs.String("ca", "", "PEM `FILE` of extra certificate authorities for TLS")
	fs.Usage = func() { archiveUsage(stderr); fs.PrintDefaults() }
	pos, err := parseArgs(fs, args)
	if err != nil {
		return parseFailed(err)
	}
	if len(pos) != 2 || *out == "" {
		fmt.Fprintln(stderr, "dosecover archive get: want URL STUDY_UID -o DIR")
		return exitUsage
	}
	if !dicomweb.ValidUID(pos[1]) {
		fmt.Fprintf(stderr, "dosecover archive get: %q is not a study UID (digits and dots)\n", pos[1])
		return exitUsage
	}
	if fi, err := os.Stat(*out); err == nil && !fi.IsDir() {
		fmt.Fprintf(stderr, "dosecover archive get: %s is not a folder\n", *out)
		return exitFailure
	}
	c, err := archiveClient(pos[0], *ca)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover archive get: %v\n", err)
		return exitFailure
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	st, err := c.Retrieve(ctx, pos[1], *out, dicomweb.RetrieveOptions{Progress: progressPrinter(stderr)})
	if err != nil {
		fmt.Fprintf(stderr, "\ndosecover archive get: %v\n", err)
		if st.Fetched > 0 {
			fmt.Fprintf(stderr, "dosecover archive get: %s holds %d files of an incomplete study; run the command again to complete it\n", *out, st.Present+st.Fetched)
		}
		return exitFailure
	}
	fmt.Fprintf(stdout, "study %s: %d instances in %s (%d fetched, %.1f MB; %d already there)\n",
		pos[1], st.Instances, *out, st.Fetched, float64(st.Bytes)/1e6, st.Present)
	return exitOK
}

// progressPrinter returns a progress callback printing "n/total" on w at
// most a few times a second.
func progressPrinter(w io.Writer) func(done, total int) {
	var mu sync.Mutex
	var last time.Time
	return func(done, total int) {
		mu.Lock()
		defer mu.Unlock()
		if done < total && time.Since(last) < 250*time.Millisecond {
			return
		}
		last = time.Now()
		fmt.Fprintf(w, "\rretrieving: %d/%d instances", done, total)
		if done == total {
			fmt.Fprintln(w)
		}
	}
}

// caseFolder turns a command's case argument into a local folder: an
// archive study address (URL/studies/UID) is retrieved into the cache
// (only what is missing) and its folder returned; anything else is
// returned as it is. On failure the message is printed and code is 1.
func caseFolder(cmd, arg string, stderr io.Writer) (dir string, code int) {
	u, ok, err := dicomweb.ParseStudyURL(arg)
	if !ok {
		return arg, exitOK
	}
	if err == nil {
		var c *dicomweb.Client
		var k *dicomweb.Cache
		if c, err = archiveClient(u.Base, os.Getenv(archiveCAEnv)); err == nil {
			if k, err = dicomweb.DefaultCache(); err == nil {
				if err = os.MkdirAll(k.Root, 0o755); err == nil {
					ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
					dir, err = k.Fetch(ctx, c, u, dicomweb.RetrieveOptions{Progress: progressPrinter(stderr)})
					stop()
				}
			}
		}
	}
	if err != nil {
		fmt.Fprintf(stderr, "dosecover %s: %v\n", cmd, err)
		return "", exitFailure
	}
	return dir, exitOK
}

// dicomResultFlags are report's options for results as DICOM objects.
type dicomResultFlags struct {
	dir   string // --dicom: folder to write the objects into
	store string // --store: DICOMweb root to store them in
}

// addDICOMResultFlags registers --dicom and --store on fs.
func addDICOMResultFlags(fs *flag.FlagSet) *dicomResultFlags {
	d := &dicomResultFlags{}
	fs.StringVar(&d.dir, "dicom", "", "also write the results as DICOM objects (report as Encapsulated PDF, CEM43 dose map, RT Structure Set) into `DIR`")
	fs.StringVar(&d.store, "store", "", "also store the DICOM results in the DICOMweb archive at `URL` (credentials from "+dicomweb.AuthEnv+")")
	return d
}

func (d *dicomResultFlags) wanted() bool { return d.dir != "" || d.store != "" }

// checkPath returns the --dicom folder, to be refused when it lies in the
// case folder, or when its parent folder does not exist ("" without
// --dicom).
func (d *dicomResultFlags) checkPath() string { return d.dir }

// write builds the DICOM results of the analysis r of the case read from
// dir, with the report in, and writes and stores them as asked.
func (d *dicomResultFlags) write(dir string, c *dosemap.Case, r *review.Result, in *report.Input, deidentify bool, stdout, stderr io.Writer) int {
	if !d.wanted() {
		return exitOK
	}
	fail := func(err error) int {
		fmt.Fprintf(stderr, "dosecover report: DICOM results: %v\n", err)
		return exitFailure
	}
	src, err := dicomout.ReadSource(dir, c)
	if err != nil {
		return fail(err)
	}
	if deidentify {
		dd, err := deid.New(deid.Options{})
		if err != nil {
			return fail(err)
		}
		src = src.Deidentified(dd, in.CaseLabel)
	}
	var pdf bytes.Buffer
	if err := report.RenderPDF(&pdf, in); err != nil {
		return fail(err)
	}
	objs, notes, err := dicomout.Results(src, c, r, pdf.Bytes(), "Thermal dose coverage report")
	if err != nil {
		return fail(err)
	}
	for _, n := range notes {
		fmt.Fprintf(stderr, "dosecover report: note: %s\n", n)
	}
	if d.dir != "" {
		if err := dicomout.Write(d.dir, objs); err != nil {
			return fail(err)
		}
		fmt.Fprintf(stdout, "wrote %d DICOM objects into %s\n", len(objs), d.dir)
	}
	if d.store != "" {
		cl, err := archiveClient(d.store, os.Getenv(archiveCAEnv))
		if err != nil {
			return fail(err)
		}
		data := make([][]byte, len(objs))
		for n, o := range objs {
			data[n] = o.Data
		}
		ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
		defer stop()
		if err := cl.Store(ctx, src.StudyUID, data); err != nil {
			return fail(err)
		}
		fmt.Fprintf(stdout, "stored %d DICOM objects in study %s on %s\n", len(objs), src.StudyUID, cl)
	}
	return exitOK
}

package main

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"strings"
	"syscall"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomweb"
	"dosecover/dosemap/safefile"
	"dosecover/review"
	"dosecover/review/follow"
)

func init() {
	register(command{name: "follow", summary: "analyse a session while it runs: watch the folder a scanner fills and analyse each sonication as it completes", run: runFollow})
}

// runFollow implements
//
//	dosecover follow DIR|URL/studies/UID [--json-lines] [--until-idle SECONDS]
//	    [--quiet SECONDS] [--poll SECONDS] [--poll-only] [the analysis options of analyze]
//
// It prints one update per completed sonication (or group of sonications
// completed together) until Ctrl-C or, with --until-idle, until the folder
// has been idle that long. Exit code 0 when following ended normally, 1
// when it could not go on (reason printed), 2 for a usage error.
func runFollow(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("follow", flag.ContinueOnError)
	fs.SetOutput(stderr)
	jsonLines := fs.Bool("json-lines", false, "print one JSON object per update (the fields of analyze's JSON result plus sonications_analysed, new_sonications, updated_at, seconds_after_last_file) instead of the text")
	untilIdle := fs.Float64("until-idle", 0, "end after `SECONDS` without a new or changed file (0: until Ctrl-C)")
	quiet := fs.Float64("quiet", 10, "a series that declares no temporal positions is complete after `SECONDS` without a new frame")
	poll := fs.Float64("poll", 0, "walk the folder (and ask an archive for new instances) every `SECONDS` (0: 2 s; walks 1 s with --poll-only)")
	pollOnly := fs.Bool("poll-only", false, "use the walks only, no file-system events (network folders, where events are unreliable)")
	sf := addStructureFlags(fs)
	af := addAnalysisFlags(fs)
	study := addStudyFlag(fs)
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: dosecover follow DIR|URL/studies/UID [--json-lines] [--until-idle SECONDS] [analysis options]")
		fmt.Fprintln(stderr, "Watches a folder that a scanner or a DICOM receiver fills during the session (never")
		fmt.Fprintln(stderr, "changes it). When a sonication is complete (every temporal position its files declare")
		fmt.Fprintln(stderr, "or, without them, no new frame for --quiet seconds) it analyses the session so far and")
		fmt.Fprintln(stderr, "prints the sonications analysed, coverage, holes, lethal volume outside the margin and")
		fmt.Fprintln(stderr, "the new sonication's own figures. Files still being written or under temporary names")
		fmt.Fprintln(stderr, "are not read; a file that stays unreadable is named. Ctrl-C ends it.")
		fmt.Fprintln(stderr, "An archive study (URL/studies/UID) is asked for new instances every --poll seconds;")
		fmt.Fprintln(stderr, "only what is new is retrieved, into the cache, and followed there.")
		fmt.Fprintln(stderr, "Exit status: 0 ended normally, 1 could not go on (reason given), 2 usage error.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return parseFailed(err)
	}
	if len(pos) != 1 {
		fmt.Fprintf(stderr, "dosecover follow: one folder expected, got %d arguments\n", len(pos))
		fs.Usage()
		return exitUsage
	}
	dir := pos[0]
	u, isURL, err := dicomweb.ParseStudyURL(dir)
	if err != nil {
		fmt.Fprintf(stderr, "dosecover follow: %v\n", err)
		return exitUsage
	}
	set, err := af.settings()
	if err != nil {
		fmt.Fprintf(stderr, "dosecover follow: %v\n", err)
		return settingsExitCode(err)
	}
	for _, d := range []struct {
		name string
		v    float64
	}{{"--until-idle", *untilIdle}, {"--quiet", *quiet}, {"--poll", *poll}} {
		if !(d.v >= 0) || d.v > 86400 {
			fmt.Fprintf(stderr, "dosecover follow: %s %g: want 0 to 86400 seconds\n", d.name, d.v)
			return exitUsage
		}
	}
	opt := follow.Options{Settings: set, Study: *study, Quiet: seconds(*quiet), Poll: seconds(*poll),
		PollOnly: *pollOnly, UntilIdle: seconds(*untilIdle), FetchEvery: seconds(*poll)}
	if isURL {
		// An archive study: its instances are retrieved into the cache
		// folder of the study as they arrive, and that folder followed.
		c, err := archiveClient(u.Base, os.Getenv(archiveCAEnv))
		if err != nil {
			fmt.Fprintf(stderr, "dosecover follow: %v\n", err)
			return exitFailure
		}
		k, err := dicomweb.DefaultCache()
		if err != nil {
			fmt.Fprintf(stderr, "dosecover follow: %v\n", err)
			return exitFailure
		}
		dir = k.Folder(u)
		if err := os.MkdirAll(dir, 0o755); err != nil {
			fmt.Fprintf(stderr, "dosecover follow: %v\n", err)
			return exitFailure
		}
		opt.Study = u.Study
		opt.Fetch = func(ctx context.Context) error {
			_, err := c.Retrieve(ctx, u.Study, dir, dicomweb.RetrieveOptions{})
			return err
		}
	}
	if err := safefile.CheckDir("case folder", dir); err != nil {
		fmt.Fprintf(stderr, "dosecover follow: %v\n", err)
		return exitFailure
	}
	if sf.contours != "" || sf.target != "" {
		opt.Structures = func(c *dosemap.Case) error { return sf.apply(c) }
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	if !*jsonLines {
		fmt.Fprintf(stdout, "Following %s (Ctrl-C ends).\n%s\n", pos[0], strings.Join(review.Cautions, "\n"))
	}
	analysed := 0
	err = follow.Run(ctx, dir, opt, func(u follow.Update) error {
		analysed = len(u.Sonications)
		if len(u.New) == 0 {
			return nil // the anatomy arrived: no new figures
		}
		if *jsonLines {
			return writeFollowJSON(stdout, u)
		}
		return writeFollowText(stdout, u)
	}, func(msg string) { fmt.Fprintf(stderr, "dosecover follow: %s\n", msg) })
	if err != nil {
		fmt.Fprintf(stderr, "dosecover follow: %v\n", err)
		return exitFailure
	}
	how := "idle for " + seconds(*untilIdle).String()
	if ctx.Err() != nil {
		how = "stopped"
	}
	fmt.Fprintf(stderr, "dosecover follow: %s; %d sonication(s) analysed\n", how, analysed)
	return exitOK
}

// seconds converts a flag in seconds.
func seconds(s float64) time.Duration { return time.Duration(math.Round(s * float64(time.Second))) }

// writeFollowJSON writes u as one line: the fields of the analysis result
// and the follow fields.
func writeFollowJSON(w io.Writer, u follow.Update) error {
	var b bytes.Buffer
	if err := u.Result.WriteJSON(&b); err != nil {
		return err
	}
	var m map[string]json.RawMessage
	if err := json.Unmarshal(b.Bytes(), &m); err != nil {
		return err
	}
	add := func(k string, v any) {
		raw, _ := json.Marshal(v)
		m[k] = raw
	}
	add("sonications_analysed", len(u.Sonications))
	add("new_sonications", u.New)
	add("updated_at", u.At.UTC().Format(time.RFC3339Nano))
	add("seconds_after_last_file", math.Round(u.Latency().Seconds()*1000)/1000)
	line, err := json.Marshal(m)
	if err != nil {
		return err
	}
	_, err = w.Write(append(line, '\n'))
	return err
}

// writeFollowText writes a few lines on u: the session so far, then each
// new sonication's own figures.
func writeFollowText(w io.Writer, u follow.Update) error {
	r := u.Result
	var b bytes.Buffer
	fmt.Fprintf(&b, "\n[%s] %d sonication(s) analysed, new %v (%.2f s after the last file)\n",
		u.At.Format("15:04:05"), len(u.Sonications), u.New, u.Latency().Seconds())
	fmt.Fprintf(&b, "  covered (dose >= %g %s): %s of the monitored target, %.1f %% of the whole target\n",
		r.Threshold, r.DoseUnit, review.PercentText(r.CoveredFraction), 100*r.CoveredFractionOfTarget)
	holes := 0.0
	for _, h := range r.Holes {
		holes += h.VolumeMM3
	}
	fmt.Fprintf(&b, "  holes: %d, %.1f mm³ in all", len(r.Holes), holes)
	if len(r.Holes) > 0 {
		fmt.Fprintf(&b, " (largest %.1f mm³)", r.Holes[0].VolumeMM3)
	}
	fmt.Fprintf(&b, "\n  lethal volume %.2f mL; %.3f mL beyond the %g mm margin\n", r.LethalVolumeML, r.OutsideMarginLethalML, r.MarginMM)
	for _, n := range u.New {
		for _, s := range r.Sonications {
			if s.Number != n {
				continue
			}
			fmt.Fprintf(&b, "  sonication %d (%s):", s.Number, s.Label)
			if s.PeakTempC != nil {
				fmt.Fprintf(&b, " peak %.1f °C,", *s.PeakTempC)
			}
			if s.Excluded {
				fmt.Fprintf(&b, " excluded from the cumulative dose\n")
				continue
			}
			added := review.PercentText(s.AddedCoverage) // "not measurable" when nothing is monitored
			fmt.Fprintf(&b, " added coverage %s, lethal volume added %.3f mL, %.3f mL of it beyond the margin\n",
				added, s.LethalAddedML, s.OutsideAddedML)
		}
	}
	for _, wn := range r.Warnings {
		fmt.Fprintf(&b, "  warning: %s\n", wn)
	}
	_, err := w.Write(b.Bytes())
	return err
}

package audit

import (
	"fmt"
	"io"
	"os"
	"strings"
	"time"
)

// IsTerminal reports whether f is a terminal (a character device), where a
// redrawn progress bar makes sense; for pipes and files it is false.
func IsTerminal(f *os.File) bool {
	fi, err := f.Stat()
	return err == nil && fi.Mode()&os.ModeCharDevice != 0
}

// ProgressPrinter returns a Progress callback that reports on w. On a
// terminal it redraws one bar with counts and the estimated time left, and
// prints a line above it for every case that is incomplete or failed;
// otherwise it writes one plain line per case, fit for a log file.
func ProgressPrinter(w io.Writer, terminal bool) func(Progress) {
	const width = 30
	return func(p Progress) {
		switch p.Phase {
		case "discovering":
			fmt.Fprintln(w, "audit: looking for cases")
			return
		case "summarising":
			if terminal {
				fmt.Fprint(w, "\r\033[K")
			}
			fmt.Fprintf(w, "audit: %d cases done (%d from an earlier run), %d incomplete, %d failed; writing the summary\n",
				p.Done, p.Resumed, p.Incomplete, p.Failed)
			return
		}
		if p.Last == nil {
			fmt.Fprintf(w, "audit: %d cases to do\n", p.Total)
			return
		}
		r := p.Last
		if !terminal {
			fmt.Fprintf(w, "audit: [%d/%d] %s %s", p.Done, p.Total, r.Case, r.Status)
			switch {
			case r.Resumed:
				fmt.Fprint(w, " (earlier run)")
			case r.Status != StatusOK:
				fmt.Fprintf(w, ": %s", oneLine(r.Reason))
			default:
				fmt.Fprintf(w, " (%.1f s)", r.Seconds)
			}
			if p.ETA > 0 {
				fmt.Fprintf(w, ", about %s left", roundETA(p.ETA))
			}
			fmt.Fprintln(w)
			return
		}
		fmt.Fprint(w, "\r\033[K")
		if r.Status != StatusOK && !r.Resumed {
			fmt.Fprintf(w, "audit: %s %s: %s\n", r.Case, r.Status, oneLine(r.Reason))
		}
		fill := 0
		if p.Total > 0 {
			fill = p.Done * width / p.Total
		}
		eta := "--"
		if p.ETA > 0 {
			eta = roundETA(p.ETA)
		}
		fmt.Fprintf(w, "[%s%s] %d/%d  incomplete %d  failed %d  elapsed %s  left %s",
			strings.Repeat("#", fill), strings.Repeat(".", width-fill), p.Done, p.Total,
			p.Incomplete, p.Failed, roundETA(p.Elapsed), eta)
	}
}

// roundETA rounds d for display: whole seconds under an hour, minutes above.
func roundETA(d time.Duration) string {
	if d >= time.Hour {
		return d.Round(time.Minute).String()
	}
	return d.Round(time.Second).String()
}

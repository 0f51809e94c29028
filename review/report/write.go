package report

import (
	"fmt"
	"io"

	"dosecover/dosemap/safefile"
)

// Outputs names the files to write; an empty path skips that file.
type Outputs struct {
	PNG, PDF, JSON, CSV string
	DPI                 int // PNG resolution; 0 means DefaultDPI
}

// Write renders in to every file named in out (a report of several pages
// writes one PNG per page, see PagePNG, and one PDF of all pages). It first refuses any target
// inside caseDir (the folder the case was read from; "" skips the check),
// then writes each file atomically. The error names the file.
func Write(in *Input, caseDir string, out Outputs) error {
	type job struct {
		path  string
		write func(io.Writer) error
	}
	dpi := out.DPI
	if dpi == 0 {
		dpi = DefaultDPI
	}
	var jobs []job
	if out.PNG != "" {
		// One PNG per page: the first at out.PNG, the others beside it
		// (PagePNG).
		for n := 1; n <= Pages(in); n++ {
			jobs = append(jobs, job{PagePNG(out.PNG, n), func(w io.Writer) error { return renderPNGPage(w, in, n, dpi) }})
		}
	}
	if out.PDF != "" {
		jobs = append(jobs, job{out.PDF, func(w io.Writer) error { return RenderPDF(w, in) }})
	}
	if out.JSON != "" {
		jobs = append(jobs, job{out.JSON, func(w io.Writer) error { return WriteJSON(w, in) }})
	}
	if out.CSV != "" {
		jobs = append(jobs, job{out.CSV, func(w io.Writer) error { return WriteCSV(w, in) }})
	}
	if len(jobs) == 0 {
		return fmt.Errorf("report: no output file given")
	}
	seen := map[string]bool{}
	for _, j := range jobs {
		if err := safefile.CheckOutside(caseDir, j.path); err != nil {
			return err
		}
		if seen[j.path] {
			return fmt.Errorf("report: %s is named for two outputs", j.path)
		}
		seen[j.path] = true
	}
	for _, j := range jobs {
		if err := safefile.WriteFile(j.path, j.write); err != nil {
			return err
		}
	}
	return nil
}

//go:build cgo

package main

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"time"
	"unicode"

	"dosecover/dosemap/safefile"
	"dosecover/review"
	"dosecover/review/report"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/dialog"
)

// exportReport asks for a folder and writes the one-page report (PNG and
// PDF) and the metrics (JSON, CSV) of the current review there. In
// teaching mode the files carry no identity: a neutral label, no scan date,
// generic sonication labels, and neutral file names.
func (rw *reviewWindow) exportReport() {
	raw, _ := rw.resultRaw()
	if raw == nil || rw.loaded == nil {
		showDialog(rw.win, dialog.NewInformation("Export report", "There is no analysis to export yet.", rw.win))
		return
	}
	if rw.record == nil {
		showDialog(rw.win, dialog.NewInformation("Export report", "A session being followed is still changing. Stop following (File ▸ Stop following) to read the folder as a finished case, then export.", rw.win))
		return
	}
	d := dialog.NewFolderOpen(func(u fyne.ListableURI, err error) {
		if err != nil {
			rw.showError("The folder could not be opened", err)
			return
		}
		if u != nil {
			rw.writeReport(u.Path())
		}
	}, rw.win)
	d.SetConfirmText("Export here")
	d.SetTitleText("Export the report into a folder (not the case folder)")
	d.Resize(fyne.NewSize(800, 560))
	d.Show()
}

func (rw *reviewWindow) resultRaw() (*review.Result, bool) {
	if rw.result == nil || rw.result.Result == nil {
		return nil, false
	}
	return rw.result.Result, true
}

// reportBase is the file name stem of the exported files: the case name
// with every run of other characters than letters, digits, '-', '_' and
// '.' replaced by one '_' ("Demo case (gel phantom)" gives
// "Demo_case_gel_phantom-dose-review").
func (rw *reviewWindow) reportBase() string {
	label := rw.caseName()
	var b strings.Builder
	gap := false
	for _, r := range label {
		switch {
		case unicode.IsLetter(r) || unicode.IsDigit(r) || r == '-' || r == '_' || r == '.':
			if gap {
				b.WriteRune('_')
				gap = false
			}
			b.WriteRune(r)
		default:
			gap = true
		}
	}
	return strings.Trim(b.String(), "._") + "-dose-review"
}

// exportStem returns the path stem of an export into dir: the case stem,
// the date (local, YYYY-MM-DD) and, when an earlier export of that day is
// there (any of its four files), "-2", "-3" ... so that no earlier export
// is overwritten.
func exportStem(dir, stem string, now time.Time) string {
	base := filepath.Join(dir, stem+"-"+now.Format("2006-01-02"))
	taken := func(b string) bool {
		for _, ext := range []string{".png", ".pdf", ".json", ".csv"} {
			if _, err := os.Lstat(b + ext); err == nil || !errors.Is(err, fs.ErrNotExist) {
				return true
			}
		}
		return false
	}
	for n, b := 2, base; ; n++ {
		if !taken(b) {
			return b
		}
		b = fmt.Sprintf("%s-%d", base, n)
	}
}

// writeReport renders and writes the report into dir off the UI goroutine.
func (rw *reviewWindow) writeReport(dir string) {
	raw, _ := rw.resultRaw()
	base := exportStem(dir, rw.reportBase(), time.Now())
	rw.lastExport = base
	out := report.Outputs{PNG: base + ".png", PDF: base + ".pdf", JSON: base + ".json", CSV: base + ".csv"}
	for _, p := range []string{out.PNG, out.PDF, out.JSON, out.CSV} {
		if err := safefile.CheckOutside(rw.loaded.Dir, p); err != nil {
			rw.exported.Add(1)
			rw.showError("The report was not written", err)
			return
		}
	}
	// The report shows a sign-off only when it was made on this very
	// analysis (review.SignOffFor); its reviewer is then the report's.
	var reviewer string
	if st := review.SignOffFor(rw.record.SignOffs, rw.hash, rw.loaded.Study, raw); st.Valid != nil {
		reviewer = st.Valid.Reviewer
	}
	opt := report.Options{
		Deidentify: rw.teaching, Reviewer: reviewer, SignOffs: rw.record.SignOffs, Study: rw.loaded.Study,
		ReviewDate: time.Now().UTC().Truncate(time.Second), InputsSHA256: rw.hash,
	}
	c, caseDir := rw.loaded.Case, rw.loaded.Dir
	rw.status.SetText("Writing the report…")
	go func() {
		in, err := report.FromResult(c, raw, opt)
		if err == nil {
			err = report.Write(in, caseDir, out)
		}
		fyne.Do(func() {
			if err != nil {
				rw.exported.Add(1)
				rw.showError("The report was not written", err)
				return
			}
			rw.status.SetText("Wrote " + rw.displayPath(out.PNG) + " and its .pdf, .json and .csv")
			rw.exported.Add(1)
		})
	}()
}

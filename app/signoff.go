//go:build cgo

package main

import (
	"fmt"

	"dosecover/review"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/widget"
)

// updateSignState shows in the header whether the analysis on screen is
// signed off (a sign-off made on this input, these settings, these
// sonications and these figures), or not for these settings.
func (rw *reviewWindow) updateSignState() {
	if rw.signState == nil {
		return
	}
	r, ok := rw.resultRaw()
	switch {
	case rw.loaded == nil || !ok:
		rw.signState.SetText("")
	case rw.record == nil || len(rw.record.SignOffs) == 0:
		rw.signState.SetText("Not signed off")
	default:
		st := review.SignOffFor(rw.record.SignOffs, rw.hash, rw.loaded.Study, r)
		if st.Valid != nil {
			who := st.Valid.Reviewer
			if rw.teaching {
				who = "a reviewer"
			}
			rw.signState.SetText("Signed off: " + st.Valid.Outcome + " (" + who + ")")
		} else {
			rw.signState.SetText("Not signed off for these settings")
		}
	}
}

// chooseStudy shows the studies of a folder that holds several and opens
// the one chosen; a review never mixes studies, so nothing is read until
// one is chosen.
func (rw *reviewWindow) chooseStudy(dir string, demo bool, lc *loadedCase) {
	labels := make([]string, len(lc.Studies))
	for n, s := range lc.Studies {
		labels[n] = s.Label
	}
	pick := widget.NewRadioGroup(labels, nil)
	pick.Required = true
	msg := widget.NewLabel(fmt.Sprintf("%s holds %d studies. A review never mixes studies: choose the one to open; the files of the others are listed as not used.",
		rw.displayPath(dir), len(lc.Studies)))
	msg.Wrapping = fyne.TextWrapWord
	rw.setBusy(fmt.Sprintf("%d studies in the folder: choose one.", len(lc.Studies)), -1)
	if rw.loaded == nil {
		rw.showNotice("The folder holds several studies; choose one to open.")
	}
	d := dialog.NewCustomConfirm("Choose a study", "Open", "Cancel",
		container.NewVBox(msg, pick), func(ok bool) {
			if !ok || pick.Selected == "" {
				rw.status.SetText("No study opened.")
				return
			}
			for _, s := range lc.Studies {
				if s.Label == pick.Selected {
					rw.openStudy(dir, demo, s.UID)
				}
			}
		}, rw.win)
	d.Resize(fyne.NewSize(860, 360))
	showDialog(rw.win, d)
}

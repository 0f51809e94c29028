//go:build cgo

package main

import (
	"io"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/app"
)

const appID = "org.dosecover.review"

// openGUI opens the review window on dir (the demo case when dir is empty)
// and returns when the window is closed.
func openGUI(dir string, _ io.Writer) int {
	a := app.NewWithID(appID)
	a.Settings().SetTheme(newReviewTheme())
	rw := newReviewWindow(a)
	rw.win.Resize(fyne.NewSize(1560, 960))
	if dir == "" {
		rw.openDemo()
	} else {
		rw.openCase(dir)
	}
	rw.win.ShowAndRun()
	return 0
}

//go:build cgo

package main

import (
	"io"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/app"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/widget"
)

const appID = "org.dosecover.review"

// openGUI opens the review window on dir (the demo case when dir is empty)
// and returns when the window is closed.
func openGUI(dir string, stderr io.Writer) int {
	a := app.NewWithID(appID)
	w := a.NewWindow("dosecover " + version)
	w.SetContent(startContent())
	w.Resize(fyne.NewSize(900, 600))
	w.ShowAndRun()
	return 0
}

func startContent() fyne.CanvasObject {
	title := widget.NewLabelWithStyle("dosecover "+version, fyne.TextAlignCenter, fyne.TextStyle{Bold: true})
	caution := widget.NewLabel(cautionText)
	caution.Wrapping = fyne.TextWrapWord
	return container.NewVBox(title, caution)
}

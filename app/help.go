//go:build cgo

package main

import (
	"fmt"
	"strings"
	"time"

	"dosecover/review"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/widget"
)

// methodsText summarises the methods and their sources for the About box.
const methodsText = `Methods
• Temperature from the proton-resonance-frequency shift: ΔT = Δφ / (γ·α·B0·TE), γ/2π = 42.577 MHz/T (CODATA 2014), α ≈ −0.01 ppm/°C (Ishihara et al., MRM 1995); baseline from the first frames; drift removed in an unheated reference region (Rieke et al., MRM 2004).
• Thermal dose as cumulative equivalent minutes at 43 °C: CEM43 = Σ R^(43−T)·Δt, R = 0.5 at or above 43 °C, 0.25 below (Sapareto & Dewey, Int J Radiat Oncol Biol Phys 1984). Optional Arrhenius damage integral Ω = A ∫ exp(−Ea/RT) dt (Henriques & Moritz 1947).
• Coverage: fraction of the target at or above the lethal threshold; holes are connected uncovered regions of the target; lethal dose outside the target grown by the margin is reported as clusters. Dose–volume metrics D98/D50/D2 after ICRU Report 83. The noise band repeats the dose calculation with seeded Gaussian temperature noise.
• Geometry in DICOM patient coordinates (LPS), DICOM PS3.3 C.7.6.2.1.1.
• Overlay colours from the Okabe–Ito set (2008); dose colourwash "viridis" (van der Walt, Smith & Firing, 2015) on a log scale.`

// showAbout shows version, methods, sources and cautions.
func (rw *reviewWindow) showAbout() {
	head := widget.NewLabelWithStyle("dosecover "+version, fyne.TextAlignLeading, fyne.TextStyle{Bold: true})
	sub := widget.NewLabel("Review of thermal-dose coverage after MR-thermometry-guided focused-ultrasound ablation.")
	sub.Wrapping = fyne.TextWrapWord
	methods := widget.NewLabel(methodsText)
	methods.Wrapping = fyne.TextWrapWord
	caution := widget.NewLabel(strings.ReplaceAll(cautionText, "\n", " "))
	caution.Wrapping = fyne.TextWrapWord
	caution.Importance = widget.WarningImportance
	box := container.NewVBox(head, sub, widget.NewSeparator(), caution, widget.NewSeparator(), methods)
	d := dialog.NewCustom("About dosecover", "Close", container.NewVScroll(box), rw.win)
	d.Resize(fyne.NewSize(720, 620))
	showDialog(rw.win, d)
}

// shortcuts lists the keyboard and mouse controls.
var shortcuts = [][2]string{
	{"Mouse wheel, ↑ ↓ (or → ←)", "next / previous slice"},
	{"Page Up / Page Down", "five slices on / back"},
	{"Home / End", "first / last slice"},
	{"Slider under each image", "choose the slice"},
	{"Left-drag", "pan"},
	{"Right-drag, or Shift + left-drag", "window (horizontal) and level (vertical)"},
	{"+ / −", "zoom in / out"},
	{"0", "whole plane"},
	{"Hover", "position (mm), anatomy value, peak temperature and dose in the status bar"},
	{"Click", "pin a point and plot its temperature over the session"},
	{"Click a hole or a cluster", "go to its slice and centre it"},
	{"Tick / untick a sonication", "re-analyse with or without it"},
	{"Select a sonication row", "show that sonication's dose alone"},
	{"Drop a folder on the window", "open it"},
	{"Review ▸ Draw drift reference, then drag", "draw the drift reference rectangle on the left image (Esc cancels)"},
	{"Ctrl+O", "open a case folder"},
	{"Ctrl+E", "export the report (PNG, PDF, JSON, CSV)"},
	{"Ctrl+,", "analysis settings"},
	{"Ctrl+T", "teaching mode on / off"},
	{"Esc", "close the dialog on top, as its Cancel or Close button does"},
}

func (rw *reviewWindow) showShortcuts() {
	form := widget.NewForm()
	for _, s := range shortcuts {
		l := widget.NewLabel(s[1])
		l.Wrapping = fyne.TextWrapWord
		form.Append(s[0], l)
	}
	d := dialog.NewCustom("Keyboard and mouse", "Close", container.NewVScroll(form), rw.win)
	d.Resize(fyne.NewSize(780, 700))
	showDialog(rw.win, d)
}

// signOff records a reviewer's name and comment with the time and the
// SHA-256 of the input files in the review record.
func (rw *reviewWindow) signOff() {
	if rw.loaded == nil || rw.record == nil {
		showDialog(rw.win, dialog.NewInformation("Sign off", "Open a case first.", rw.win))
		return
	}
	if rw.result == nil {
		showDialog(rw.win, dialog.NewInformation("Sign off", "The case has not been analysed; there is nothing to sign off yet.", rw.win))
		return
	}
	name := newDialogEntry()
	name.SetText(rw.app.Preferences().String(prefReviewer))
	name.SetPlaceHolder("your name")
	comment := newDialogMultiLineEntry()
	comment.SetMinRowsVisible(4)
	comment.Wrapping = fyne.TextWrapWord
	facts := widget.NewLabel(fmt.Sprintf("Input files: %d, SHA-256 %s\nCovered: %s\nSettings: %s",
		rw.nFiles, rw.hash, coveredText(rw.result.Result), rw.settings.Describe()))
	facts.Wrapping = fyne.TextWrapWord
	var prev []string
	for _, s := range rw.record.SignOffs {
		prev = append(prev, fmt.Sprintf("%s by %s: %s", s.Time.Local().Format("2006-01-02 15:04"), s.Reviewer, s.Outcome))
	}
	outcome := widget.NewRadioGroup(review.Outcomes, nil)
	outcome.Required = true
	items := []*widget.FormItem{
		widget.NewFormItem("Reviewer", name),
		widget.NewFormItem("Outcome", outcome),
		widget.NewFormItem("Comment", comment),
		widget.NewFormItem("Record", facts),
	}
	if len(prev) > 0 {
		items = append(items, widget.NewFormItem("Earlier", widget.NewLabel(strings.Join(prev, "\n"))))
	}
	d := dialog.NewForm("Sign off this review", "Sign off", "Cancel", items, func(ok bool) {
		if !ok {
			return
		}
		who := strings.TrimSpace(name.Text)
		if who == "" {
			showDialog(rw.win, dialog.NewInformation("Sign off", "A sign-off needs the reviewer's name; nothing was recorded.", rw.win))
			return
		}
		if outcome.Selected == "" {
			showDialog(rw.win, dialog.NewInformation("Sign off", "A sign-off needs an outcome; nothing was recorded.", rw.win))
			return
		}
		rw.app.Preferences().SetString(prefReviewer, who)
		if err := rw.addSignOff(who, outcome.Selected, comment.Text, time.Now()); err != nil {
			rw.showError("The sign-off could not be saved", err)
			return
		}
		rw.status.SetText(fmt.Sprintf("Signed off by %s.", who))
		rw.metrics.update()
	}, rw.win)
	d.Resize(fyne.NewSize(720, 420))
	showDialog(rw.win, d)
}

// addSignOff records a sign-off of the analysis on screen (its input
// hash, complete settings, left-out sonications and headline figures) and
// saves the record.
func (rw *reviewWindow) addSignOff(who, outcome, comment string, at time.Time) error {
	r, ok := rw.resultRaw()
	if !ok {
		return fmt.Errorf("the case has not been analysed; there is nothing to sign off")
	}
	so, err := review.NewSignOff(who, outcome, comment, rw.hash, rw.loaded.Study, r, at)
	if err != nil {
		return err
	}
	rw.record.SignOffs = append(rw.record.SignOffs, so)
	rw.record.Settings = rw.settings
	if err := rw.record.save(); err != nil {
		return err
	}
	rw.updateSignState()
	return nil
}

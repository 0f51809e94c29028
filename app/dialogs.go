//go:build cgo

package main

import (
	"slices"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/widget"
)

// openDialogs lists the dialogs shown with showDialog over each window,
// the newest last. Fyne's dialogs take no keys of their own; the window's
// key handler closes the newest with Escape (escapeDialog).
var openDialogs = map[fyne.Window][]dialog.Dialog{}

// showDialog shows d over w so that Escape closes it as its Cancel or
// Close button does.
func showDialog(w fyne.Window, d dialog.Dialog) {
	d.SetOnClosed(func() {
		ds := openDialogs[w]
		if i := slices.Index(ds, d); i >= 0 {
			ds = slices.Delete(ds, i, i+1)
		}
		if len(ds) == 0 {
			delete(openDialogs, w)
		} else {
			openDialogs[w] = ds
		}
	})
	openDialogs[w] = append(openDialogs[w], d)
	d.Show()
}

// escapeDialog closes the newest dialog over w as its Cancel or Close
// button would and reports whether there was one. It leaves the dialogs
// alone while something else is on top of them (a drop-down list, a file
// chooser): the key then belongs to that.
func escapeDialog(w fyne.Window) bool {
	ds := openDialogs[w]
	if len(ds) == 0 || len(w.Canvas().Overlays().List()) != len(ds) {
		return false
	}
	ds[len(ds)-1].Hide()
	return true
}

// dialogEntry is a text field of a dialog. Fyne sends the keys to the
// field that has the keyboard focus, and widget.Entry ignores Escape; in
// a dialogEntry, Escape closes the dialog as it does with no field
// focused.
type dialogEntry struct {
	widget.Entry
}

func newDialogEntry() *dialogEntry {
	e := &dialogEntry{}
	e.ExtendBaseWidget(e)
	return e
}

func newDialogMultiLineEntry() *dialogEntry {
	e := newDialogEntry()
	e.MultiLine = true
	return e
}

// TypedKey closes the dialog on Escape and passes other keys on.
func (e *dialogEntry) TypedKey(ev *fyne.KeyEvent) {
	if ev.Name == fyne.KeyEscape {
		c := fyne.CurrentApp().Driver().CanvasForObject(e)
		for w := range openDialogs {
			if c != nil && w.Canvas() == c && escapeDialog(w) {
				return
			}
		}
	}
	e.Entry.TypedKey(ev)
}

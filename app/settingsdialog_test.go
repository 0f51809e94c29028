//go:build cgo

package main

import (
	"strings"
	"testing"

	"dosecover/review"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/widget"
)

// dialogParts finds, in the window's overlays, the entries of the
// settings dialog by their form labels, its buttons by their text and its
// labels.
func dialogParts(w fyne.Window) (entries map[string]*widget.Entry, buttons map[string]*widget.Button, labels []*widget.Label) {
	entries, buttons = map[string]*widget.Entry{}, map[string]*widget.Button{}
	var walk func(o fyne.CanvasObject)
	walk = func(o fyne.CanvasObject) {
		switch x := o.(type) {
		case *widget.Form:
			for _, it := range x.Items {
				if e, ok := it.Widget.(*dialogEntry); ok {
					entries[it.Text] = &e.Entry
				}
			}
		case *widget.Button:
			buttons[x.Text] = x
		case *widget.Label:
			labels = append(labels, x)
		case *fyne.Container:
			if _, ok := x.Layout.(settingsColumns); ok {
				// Rows of label, field and unit: named as a form item
				// would be, "label (unit)".
				for i := 0; i+2 < len(x.Objects); i += 3 {
					name, unit := x.Objects[i].(*widget.Label).Text, x.Objects[i+2].(*widget.Label).Text
					if unit != "" {
						name += " (" + unit + ")"
					}
					if e, ok := x.Objects[i+1].(*dialogEntry); ok {
						entries[name] = &e.Entry
					}
				}
			}
			for _, ch := range x.Objects {
				walk(ch)
			}
		}
		if x, ok := o.(fyne.Widget); ok {
			for _, ch := range test.WidgetRenderer(x).Objects() {
				walk(ch)
			}
		}
	}
	for _, o := range w.Canvas().Overlays().List() {
		walk(o)
	}
	return entries, buttons, labels
}

// TestSettingsDialogFocalLengthAndDriftFlag: the settings dialog shows the
// focal length and the drift flag, applies what is entered, and refuses a
// drift flag of 0 naming the field as the dialog does (not by its JSON
// key).
func TestSettingsDialogFocalLengthAndDriftFlag(t *testing.T) {
	rw := testWindow(t)
	var got *review.Settings
	showSettingsDialog(rw.win, review.DefaultSettings(), "", "", func(s review.Settings) { got = &s })
	entries, buttons, labels := dialogParts(rw.win)
	focal, flag, apply := entries["Focal length along the beam (mm)"], entries["Flag drift removed above (°C)"], buttons["Apply"]
	if focal == nil || flag == nil || apply == nil {
		t.Fatalf("dialog without the focal length, the drift flag or Apply: %v", entries)
	}
	if focal.Text != "" || flag.Text != "1" {
		t.Errorf("defaults shown: focal length %q (want empty: 0), drift flag %q (want 1)", focal.Text, flag.Text)
	}
	flag.SetText("0")
	test.Tap(apply)
	if got != nil {
		t.Fatalf("a drift flag of 0 was applied: %+v", *got)
	}
	refused := ""
	for _, l := range labels {
		if strings.Contains(l.Text, "drift") {
			refused = l.Text
		}
	}
	if !strings.HasPrefix(refused, "Flag drift removed above 0 °C") || strings.Contains(refused, "_") {
		t.Errorf("refusal %q, want it to name the field as the dialog does", refused)
	}
	focal.SetText("12,5")
	flag.SetText("1.5")
	test.Tap(apply)
	if got == nil || got.FocalLengthMM != 12.5 || got.DriftFlagC != 1.5 {
		t.Errorf("applied %+v, want focal length 12.5 mm and drift flag 1.5 °C", got)
	}
}

//go:build cgo

package main

import (
	"errors"
	"testing"

	"fyne.io/fyne/v2"
)

// pressEscape sends Escape to c as the desktop driver does when no field
// has the keyboard focus: to the canvas's key handler.
func pressEscape(t *testing.T, c fyne.Canvas) {
	t.Helper()
	if f := c.Focused(); f != nil {
		t.Fatalf("%T has the keyboard focus; Escape would go to it", f)
	}
	c.OnTypedKey()(&fyne.KeyEvent{Name: fyne.KeyEscape})
}

// TestEscapeClosesDialogs: Escape closes each dialog of the review window
// as its Cancel or Close button does (a sign-off closed so records
// nothing), the newest first when one is shown over another.
func TestEscapeClosesDialogs(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	c := rw.win.Canvas()
	for _, d := range []struct {
		name string
		open func()
	}{
		{"About", rw.showAbout},
		{"Keyboard and mouse", rw.showShortcuts},
		{"Analysis settings", rw.openSettings},
		{"Sign off", rw.signOff},
		{"error", func() { rw.showError("The report could not be written", errors.New("disk full")) }},
	} {
		d.open()
		if c.Overlays().Top() == nil {
			t.Fatalf("%s: no dialog shown", d.name)
		}
		pressEscape(t, c)
		if top := c.Overlays().Top(); top != nil {
			t.Errorf("%s: the dialog stays after Escape", d.name)
			top.Hide()
			c.Overlays().Remove(top)
		}
	}
	if rw.record != nil && len(rw.record.SignOffs) != 0 {
		t.Errorf("Escape on the sign-off dialog recorded %d sign-offs", len(rw.record.SignOffs))
	}
	// An error over the settings: the error goes first, then the settings.
	rw.openSettings()
	rw.showError("The settings file could not be read", errors.New("not JSON"))
	if n := len(c.Overlays().List()); n != 2 {
		t.Fatalf("%d dialogs shown, want the settings and the error", n)
	}
	pressEscape(t, c)
	if n := len(c.Overlays().List()); n != 1 {
		t.Fatalf("after one Escape %d dialogs are shown, want the settings", n)
	}
	pressEscape(t, c)
	if n := len(c.Overlays().List()); n != 0 {
		t.Errorf("after two Escapes %d dialogs are shown, want none", n)
	}
}

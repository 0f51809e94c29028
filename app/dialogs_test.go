//go:build cgo

package main

import (
	"errors"
	"strings"
	"testing"

	"dosecover/review"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/test"
	"fyne.io/fyne/v2/widget"
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
		closedByEscape(t, c, d.name+": the dialog stays after Escape")
	}
	noSignOff(t, rw)
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

// TestStatusLineOnHover: the status line after an analysis names the
// settings in a sentence ("Analysed: Threshold 240 …", not "Analysed with
// Threshold …"); cut at the window's edge, it shows in full on hover.
func TestStatusLineOnHover(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	want := "Analysed: " + rw.settings.Describe() + "."
	if rw.status.Text != want {
		t.Fatalf("status %q, want %q", rw.status.Text, want)
	}
	if !rw.status.cut() {
		t.Fatalf("status line %g px wide is not cut; the test needs a longer line", rw.status.Size().Width)
	}
	c := rw.win.Canvas()
	d := fyne.CurrentApp().Driver()
	test.MoveMouse(c, d.AbsolutePositionForObject(rw.status).AddXY(30, rw.status.Size().Height/2))
	if got := rw.tips.shown(); got != want {
		t.Errorf("hovering the status line shows %q, want its full text", got)
	}
	box := rw.tips.box
	if p, win := d.AbsolutePositionForObject(box), c.Size(); p.X < 0 || p.Y < 0 || p.X+box.Size().Width > win.Width+0.5 || p.Y+box.Size().Height > win.Height+0.5 {
		t.Errorf("tip at %v size %v leaves the %v window", p, box.Size(), win)
	}
	test.MoveMouse(c, fyne.NewPos(5, 5))
	if got := rw.tips.shown(); got != "" {
		t.Errorf("after the pointer left, the tip %q stays", got)
	}
}

// TestMenuShowsShortcuts: the menu items that have a keyboard shortcut
// show it, the same shortcut the window answers to and the help lists.
func TestMenuShowsShortcuts(t *testing.T) {
	rw := testWindow(t)
	help := map[string]bool{}
	for _, s := range shortcuts {
		help[s[0]] = true
	}
	items := map[string]*fyne.MenuItem{}
	for _, m := range rw.mainMenu().Items {
		for _, it := range m.Items {
			items[it.Label] = it
		}
	}
	for _, c := range []struct {
		item, help string
		key        fyne.KeyName
	}{
		{"Open folder…", "Ctrl+O", fyne.KeyO},
		{"Analysis settings…", "Ctrl+,", fyne.KeyComma},
		{"Export report…", "Ctrl+E", fyne.KeyE},
	} {
		it := items[c.item]
		if it == nil {
			t.Errorf("no menu item %q", c.item)
			continue
		}
		if it.Shortcut == nil || it.Shortcut.ShortcutName() != ctrlKey(c.key).ShortcutName() {
			t.Errorf("menu item %q shows shortcut %v, want %s", c.item, it.Shortcut, c.help)
		}
		if !help[c.help] {
			t.Errorf("the help does not list %s", c.help)
		}
	}
	// The window answers to the shortcut the menu shows: Ctrl+, opens
	// the settings.
	rw.win.Canvas().(fyne.Shortcutable).TypedShortcut(items["Analysis settings…"].Shortcut)
	if rw.win.Canvas().Overlays().Top() == nil {
		t.Error("the settings shortcut shown in the menu opens no dialog")
	}
	if !help["Esc"] {
		t.Error("the help does not say that Esc closes a dialog")
	}
}

// TestEscapeInDialogField: Escape typed into a focused text field of the
// settings or the sign-off dialog closes the dialog (the driver sends the
// key to the field, not to the window); other keys still edit the field.
func TestEscapeInDialogField(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	c := rw.win.Canvas()
	for _, d := range []struct {
		name string
		open func()
	}{{"Analysis settings", rw.openSettings}, {"Sign off", rw.signOff}, {"Open from archive", rw.openFromArchive}} {
		d.open()
		top := c.Overlays().Top()
		if top == nil {
			t.Fatalf("%s: no dialog shown", d.name)
		}
		fields := objectsOf[*dialogEntry](top)
		if len(fields) == 0 {
			t.Fatalf("%s: no text field", d.name)
		}
		f := fields[0]
		c.Focus(f)
		if c.Focused() != fyne.Focusable(f) {
			t.Fatalf("%s: the field did not take the focus", d.name)
		}
		before := f.Text
		test.Type(f, "7")
		c.Focused().TypedKey(&fyne.KeyEvent{Name: fyne.KeyBackspace})
		if f.Text != before {
			t.Errorf("%s: typing 7 and Backspace left %q, want %q", d.name, f.Text, before)
		}
		c.Focused().TypedKey(&fyne.KeyEvent{Name: fyne.KeyEscape})
		closedByEscape(t, c, d.name+": the dialog stays after Escape in its field")
	}
	noSignOff(t, rw)
}

// TestSignOffRecordWording: the record the sign-off dialog shows says of
// what the covered percentage is when part of the target is not
// monitored (as the figures panel does), and names the settings in a
// line of their own rather than "Covered … with Threshold …".
func TestSignOffRecordWording(t *testing.T) {
	rw := testWindow(t)
	openSynthetic(t, rw)
	rw.result.NotMonitoredFraction = 0.4 // part of the target unmonitored
	rw.signOff()
	top := rw.win.Canvas().Overlays().Top()
	if top == nil {
		t.Fatal("no sign-off dialog")
	}
	var record string
	for _, l := range objectsOf[*widget.Label](top) {
		if strings.HasPrefix(l.Text, "Input files:") {
			record = l.Text
		}
	}
	want := "\nCovered: " + review.PercentText(rw.result.CoveredFraction) + " of the monitored target\nSettings: " + rw.settings.Describe()
	if !strings.HasSuffix(record, want) {
		t.Errorf("record %q, want it to end %q", record, want)
	}
}

// closedByEscape reports failure when a dialog is still on top of c, and
// removes it so the next dialog of the test starts alone.
func closedByEscape(t *testing.T, c fyne.Canvas, failure string) {
	t.Helper()
	if top := c.Overlays().Top(); top != nil {
		t.Error(failure)
		top.Hide()
		c.Overlays().Remove(top)
	}
}

// noSignOff reports failure when closing dialogs with Escape recorded a
// sign-off.
func noSignOff(t *testing.T, rw *reviewWindow) {
	t.Helper()
	if rw.record != nil && len(rw.record.SignOffs) != 0 {
		t.Errorf("Escape on the sign-off dialog recorded %d sign-offs", len(rw.record.SignOffs))
	}
}

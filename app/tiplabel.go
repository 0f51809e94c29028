//go:build cgo

package main

import (
	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/driver/desktop"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"
)

// tipLabel is a label cut with an ellipsis where it does not fit; while
// the pointer rests on a cut label its full text shows in the window's tip
// layer (Fyne has no tooltips).
type tipLabel struct {
	widget.Label
	tips *tipLayer
}

func newTipLabel(tips *tipLayer) *tipLabel {
	l := &tipLabel{tips: tips}
	l.Truncation = fyne.TextTruncateEllipsis
	l.ExtendBaseWidget(l)
	return l
}

// tipText returns a label of text, cut where it does not fit, its full
// text on hover.
func tipText(tips *tipLayer, text string) *tipLabel {
	l := newTipLabel(tips)
	l.SetText(text)
	return l
}

// cut reports whether the label's text is wider than the label.
func (l *tipLabel) cut() bool {
	if l.Text == "" || !l.Visible() {
		return false
	}
	w := fyne.MeasureText(l.Text, theme.TextSize(), l.TextStyle).Width + 2*theme.InnerPadding()
	return w > l.Size().Width+0.5
}

// MouseIn shows the full text of a cut label.
func (l *tipLabel) MouseIn(*desktop.MouseEvent) {
	if l.tips != nil && l.cut() {
		l.tips.show(l, l.Text)
	}
}

// MouseMoved keeps the tip.
func (l *tipLabel) MouseMoved(*desktop.MouseEvent) {}

// MouseOut hides the tip.
func (l *tipLabel) MouseOut() {
	if l.tips != nil {
		l.tips.hide(l)
	}
}

// tipLayer draws the full text of a hovered cut label over the window's
// content, just below the label. It is a plain layer above the content,
// not a pop-up: it takes no pointer events, so the label under it keeps
// its hover.
type tipLayer struct {
	layer *fyne.Container // no layout; spans the window content
	box   *fyne.Container
	text  *widget.Label
	owner fyne.CanvasObject // the label whose text is shown; nil when hidden
}

// tipMaxWidth is the widest a tip grows before it wraps its text.
const tipMaxWidth = 640

func newTipLayer() *tipLayer {
	t := &tipLayer{text: widget.NewLabel("")}
	t.text.Wrapping = fyne.TextWrapWord
	bg := canvas.NewRectangle(theme.Color(theme.ColorNameOverlayBackground))
	bg.StrokeColor = theme.Color(theme.ColorNameForeground)
	bg.StrokeWidth = 1
	bg.CornerRadius = theme.InputRadiusSize()
	t.box = container.NewStack(bg, t.text)
	t.box.Hide()
	t.layer = container.NewWithoutLayout(t.box)
	return t
}

// show puts text below owner, inside the layer.
func (t *tipLayer) show(owner fyne.CanvasObject, text string) {
	t.owner = owner
	t.text.SetText(text)
	// One line if it fits within tipMaxWidth, else wrapped to that width.
	w := fyne.MeasureText(text, theme.TextSize(), fyne.TextStyle{}).Width + 2*theme.InnerPadding() + 2
	if w > tipMaxWidth {
		w = tipMaxWidth
	}
	t.text.Resize(fyne.NewSize(w, t.text.MinSize().Height))
	size := fyne.NewSize(w, t.text.MinSize().Height)
	d := fyne.CurrentApp().Driver()
	at := d.AbsolutePositionForObject(owner).Subtract(d.AbsolutePositionForObject(t.layer))
	at.Y += owner.Size().Height
	// Keep the tip inside the layer: to the left of its right edge, and
	// above the label when there is no room below it.
	area := t.layer.Size()
	if at.X+size.Width > area.Width {
		at.X = max(0, area.Width-size.Width)
	}
	if at.Y+size.Height > area.Height {
		at.Y = max(0, at.Y-owner.Size().Height-size.Height)
	}
	t.box.Move(at)
	t.box.Resize(size)
	t.box.Show()
	t.layer.Refresh()
}

// hide removes the tip shown for owner.
func (t *tipLayer) hide(owner fyne.CanvasObject) {
	if t.owner != owner {
		return
	}
	t.owner = nil
	t.box.Hide()
	t.layer.Refresh()
}

// shown returns the text on show, "" when none.
func (t *tipLayer) shown() string {
	if t.owner == nil || !t.box.Visible() {
		return ""
	}
	return t.text.Text
}

// tipButton is a button that shows a fixed text in the window's tip layer
// while the pointer rests on it, whether or not its own text is cut: the
// column headers of the tables, whose short titles need their full name,
// unit and meaning.
type tipButton struct {
	widget.Button
	tips *tipLayer
	tip  string // shown on hover; "" none
}

func newTipButton(tips *tipLayer) *tipButton {
	b := &tipButton{tips: tips}
	b.ExtendBaseWidget(b)
	return b
}

// setTip sets the text shown on hover, replacing it on show.
func (b *tipButton) setTip(tip string) {
	b.tip = tip
	if b.tips != nil && b.tips.owner == fyne.CanvasObject(b) {
		if tip == "" {
			b.tips.hide(b)
		} else {
			b.tips.show(b, tip)
		}
	}
}

// MouseIn highlights the button and shows its tip.
func (b *tipButton) MouseIn(e *desktop.MouseEvent) {
	b.Button.MouseIn(e)
	if b.tips != nil && b.tip != "" {
		b.tips.show(b, b.tip)
	}
}

// MouseOut ends the highlight and hides the tip.
func (b *tipButton) MouseOut() {
	b.Button.MouseOut()
	if b.tips != nil {
		b.tips.hide(b)
	}
}

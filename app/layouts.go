//go:build cgo

package main

import (
	"strings"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/theme"
	"fyne.io/fyne/v2/widget"
)

// flowLayout places objects left to right at their minimum size and
// starts a new row where the next one would not fit, each row as tall as
// its tallest object (the others centred in it). Its minimum width is that
// of the widest object, so it never holds a window wider than it is; its
// minimum height is that of the rows at the width it was last given.
type flowLayout struct {
	width float32 // the width of the last layout; 0 before the first
}

func newFlowLayout() *flowLayout { return &flowLayout{} }

// rows returns the rows of the visible objects at width w and the total
// height.
func (f *flowLayout) rows(objects []fyne.CanvasObject, w float32) ([][]fyne.CanvasObject, []float32, float32) {
	pad := theme.Padding()
	var rows [][]fyne.CanvasObject
	var heights []float32
	var x, total float32
	for _, o := range objects {
		if !o.Visible() {
			continue
		}
		m := o.MinSize()
		if len(rows) == 0 || (x > 0 && x+m.Width > w) {
			rows = append(rows, nil)
			heights = append(heights, 0)
			x = 0
		}
		n := len(rows) - 1
		rows[n] = append(rows[n], o)
		heights[n] = max(heights[n], m.Height)
		x += m.Width + pad
	}
	for n, h := range heights {
		total += h
		if n > 0 {
			total += pad
		}
	}
	return rows, heights, total
}

// MinSize is the widest object by the height of the rows at the last width.
func (f *flowLayout) MinSize(objects []fyne.CanvasObject) fyne.Size {
	var widest float32
	for _, o := range objects {
		if o.Visible() {
			widest = max(widest, o.MinSize().Width)
		}
	}
	w := f.width
	if w <= 0 {
		w = widest
	}
	_, _, h := f.rows(objects, max(w, widest))
	return fyne.NewSize(widest, h)
}

// Layout places the objects in rows at the container's width.
func (f *flowLayout) Layout(objects []fyne.CanvasObject, size fyne.Size) {
	f.width = size.Width
	pad := theme.Padding()
	rows, heights, _ := f.rows(objects, size.Width)
	var y float32
	for n, row := range rows {
		var x float32
		for _, o := range row {
			m := o.MinSize()
			o.Resize(m)
			o.Move(fyne.NewPos(x, y+(heights[n]-m.Height)/2))
			x += m.Width + pad
		}
		y += heights[n] + pad
	}
}

// headerLayout shares a row between the case title and the identity line:
// the title keeps its full width while it takes at most half the row or
// what the identity leaves; both are cut with an ellipsis (their full
// text shows on hover) rather than drawn over each other.
type headerLayout struct{}

// natural is the width o needs to show all its text.
func natural(o fyne.CanvasObject) float32 {
	if l, ok := o.(*tipLabel); ok {
		if l.Text == "" {
			return 0
		}
		return fyne.MeasureText(l.Text, theme.TextSize(), l.TextStyle).Width + 2*theme.InnerPadding() + 1
	}
	return o.MinSize().Width
}

func (headerLayout) MinSize(objects []fyne.CanvasObject) fyne.Size {
	var s fyne.Size
	for _, o := range objects {
		m := o.MinSize()
		s = fyne.NewSize(s.Width+m.Width, max(s.Height, m.Height))
	}
	return s
}

func (headerLayout) Layout(objects []fyne.CanvasObject, size fyne.Size) {
	if len(objects) != 2 {
		return
	}
	title, id := objects[0], objects[1]
	tw := min(natural(title), max(size.Width/2, size.Width-natural(id)))
	title.Move(fyne.NewPos(0, 0))
	title.Resize(fyne.NewSize(tw, size.Height))
	id.Move(fyne.NewPos(tw, 0))
	id.Resize(fyne.NewSize(max(0, size.Width-tw), size.Height))
}

// Column widths of the settings dialog: every field of every section in
// one column, the labels in one before it and the units in one after it.
const (
	settingsLabelW = 232
	settingsUnitW  = 150
)

// settingsForm lays out form items in the settings dialog's columns: the
// label, the field, and the unit, taken from a trailing "(…)" of the
// item's text ("Safety margin (mm)": label "Safety margin", unit "mm").
// units holds the unit label of each item by its label.
func settingsForm(units map[string]*widget.Label, items ...*widget.FormItem) *fyne.Container {
	var objs []fyne.CanvasObject
	for _, it := range items {
		name, unit := it.Text, ""
		if strings.HasSuffix(name, ")") {
			if i := strings.LastIndex(name, " ("); i > 0 {
				name, unit = name[:i], name[i+2:len(name)-1]
			}
		}
		l := widget.NewLabelWithStyle(name, fyne.TextAlignTrailing, fyne.TextStyle{Bold: true})
		l.Truncation = fyne.TextTruncateEllipsis
		u := widget.NewLabel(unit)
		u.Truncation = fyne.TextTruncateEllipsis
		if units != nil {
			units[name] = u
		}
		objs = append(objs, l, it.Widget, u)
	}
	return container.New(settingsColumns{}, objs...)
}

// settingsColumns places objects three by three in rows: label, field,
// unit, each row as tall as its tallest object.
type settingsColumns struct{}

func (settingsColumns) MinSize(objects []fyne.CanvasObject) fyne.Size {
	pad := theme.Padding()
	var h, fieldW float32
	for i := 0; i+2 < len(objects); i += 3 {
		if i > 0 {
			h += pad
		}
		h += max(objects[i].MinSize().Height, objects[i+1].MinSize().Height, objects[i+2].MinSize().Height)
		fieldW = max(fieldW, objects[i+1].MinSize().Width)
	}
	return fyne.NewSize(settingsLabelW+settingsUnitW+max(fieldW, 120)+2*pad, h)
}

func (settingsColumns) Layout(objects []fyne.CanvasObject, size fyne.Size) {
	pad := theme.Padding()
	fieldW := max(0, size.Width-settingsLabelW-settingsUnitW-2*pad)
	var y float32
	for i := 0; i+2 < len(objects); i += 3 {
		h := max(objects[i].MinSize().Height, objects[i+1].MinSize().Height, objects[i+2].MinSize().Height)
		objects[i].Move(fyne.NewPos(0, y))
		objects[i].Resize(fyne.NewSize(settingsLabelW, h))
		objects[i+1].Move(fyne.NewPos(settingsLabelW+pad, y))
		objects[i+1].Resize(fyne.NewSize(fieldW, h))
		objects[i+2].Move(fyne.NewPos(settingsLabelW+2*pad+fieldW, y))
		objects[i+2].Resize(fyne.NewSize(settingsUnitW, h))
		y += h + pad
	}
}

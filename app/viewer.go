//go:build cgo

package main

import (
	"image"
	"image/color"
	"math"

	"dosecover/dosemap"
	"dosecover/review"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"fyne.io/fyne/v2/driver/desktop"
	"fyne.io/fyne/v2/widget"
)

// sliceViewer shows one plane of the case: anatomy in grey, the dose
// colourwash and the overlays. Wheel and arrow keys change the slice,
// left-drag pans, right-drag (or Shift+left-drag) changes window and level,
// + and - zoom, a click pins the probe.
type sliceViewer struct {
	widget.BaseWidget

	kind  planeKind
	scene *sceneLayers
	opt   *displayOptions // shared by the viewers of one window
	ref   *dosemap.Geometry

	slice     int
	zoom      float64 // 1: the whole plane fits
	panU      float64 // mm of the view centre from the plane centre along u
	panV      float64
	raster    *canvas.Raster
	cache     any           // the renderer's state for this viewer
	last      viewTransform // of the latest render, in raster pixels
	lastSize  fyne.Size     // widget size at that render
	dragWL    bool
	wlFrom    fyne.Position
	wlStarted bool

	// Drift reference drawing: while refMode is on, a left-drag draws a
	// rectangle (refA to refB) instead of panning; onRef receives it.
	refMode    bool
	refA, refB *dosemap.Vec3
	onRef      func(a, b, u, v dosemap.Vec3)
	refShown   func() *review.Rect // the reference region to outline; nil: none

	onHover  func(p dosemap.Vec3, inside bool)
	onPin    func(p dosemap.Vec3)
	onSlice  func(slice int)
	onWindow func()
	onFocus  func(v *sliceViewer)
}

func newSliceViewer(kind planeKind, opt *displayOptions) *sliceViewer {
	v := &sliceViewer{kind: kind, opt: opt, zoom: 1}
	v.raster = canvas.NewRaster(v.draw)
	v.raster.ScaleMode = canvas.ImageScaleFastest
	v.ExtendBaseWidget(v)
	return v
}

// setScene shows scene on the reference grid ref (nil clears the view).
// The slice is kept when the grid is the same, else the middle slice.
func (v *sliceViewer) setScene(scene *sceneLayers, ref *dosemap.Geometry) {
	same := v.ref != nil && ref != nil && v.ref.SameGrid(*ref, 1e-3)
	v.scene, v.ref = scene, ref
	if !same && ref != nil {
		_, _, _, n, _, _, _ := planeAxes(*ref, v.kind)
		v.slice = n / 2
		v.zoom, v.panU, v.panV = 1, 0, 0
	}
	v.Refresh()
}

// setKind switches the plane and goes to its middle slice.
func (v *sliceViewer) setKind(k planeKind) {
	v.kind = k
	v.panU, v.panV = 0, 0
	if v.ref != nil {
		_, _, _, n, _, _, _ := planeAxes(*v.ref, k)
		v.slice = n / 2
	}
	v.Refresh()
	if v.onSlice != nil {
		v.onSlice(v.slice)
	}
}

// slices returns the number of slices of the current plane.
func (v *sliceViewer) slices() int {
	if v.ref == nil {
		return 0
	}
	_, _, _, n, _, _, _ := planeAxes(*v.ref, v.kind)
	return n
}

// setSlice shows slice k (clamped), redrawing at once.
func (v *sliceViewer) setSlice(k int) {
	n := v.slices()
	if n == 0 {
		return
	}
	k = max(0, min(n-1, k))
	if k == v.slice {
		return
	}
	v.slice = k
	v.raster.Refresh()
	if v.onSlice != nil {
		v.onSlice(k)
	}
}

// centreOn goes to the slice through p and pans p to the middle.
func (v *sliceViewer) centreOn(p dosemap.Vec3) {
	if v.ref == nil {
		return
	}
	u, w, n, slices, step, _, _ := planeAxes(*v.ref, v.kind)
	c := gridCentre(*v.ref)
	d := p.Sub(c)
	k := int(math.Round(d.Dot(n)/step + float64(slices-1)/2))
	v.panU, v.panV = d.Dot(u), d.Dot(w)
	if v.zoom < 2 {
		v.zoom = 2
	}
	v.slice = -1
	v.setSlice(k)
	v.raster.Refresh()
}

// goTo shows the slice through p, keeping zoom and pan.
func (v *sliceViewer) goTo(p dosemap.Vec3) {
	if v.ref == nil {
		return
	}
	_, _, n, slices, step, _, _ := planeAxes(*v.ref, v.kind)
	k := int(math.Round(p.Sub(gridCentre(*v.ref)).Dot(n)/step + float64(slices-1)/2))
	v.setSlice(k)
}

// transform returns the view transform for a w×h pixel image.
func (v *sliceViewer) transform(w, h int) (viewTransform, bool) {
	if v.ref == nil || w <= 0 || h <= 0 {
		return viewTransform{}, false
	}
	u, vv, n, slices, step, width, height := planeAxes(*v.ref, v.kind)
	s := math.Max(width/float64(w), height/float64(h)) / v.zoom
	sc := gridCentre(*v.ref).Add(n.Scale((float64(v.slice) - float64(slices-1)/2) * step))
	c := sc.Add(u.Scale(v.panU)).Add(vv.Scale(v.panV))
	sp := v.ref.Spacing
	frame := sliceFrame{Centre: sc, Width: width, Height: height, Spacing: math.Min(sp[0], sp[1]),
		Normal: n, Step: step, Index: v.slice, Count: slices}
	if v.kind != planeAcquisition {
		frame.Spacing = math.Min(frame.Spacing, sp[2])
	}
	return viewTransform{Centre: c, U: u, V: vv, MMPerPixel: s, W: w, H: h, Slice: frame}, true
}

func (v *sliceViewer) draw(w, h int) image.Image {
	t, ok := v.transform(w, h)
	if !ok || v.scene == nil {
		img := image.NewRGBA(image.Rect(0, 0, max(w, 1), max(h, 1)))
		for n := 3; n < len(img.Pix); n += 4 {
			img.Pix[n-3], img.Pix[n-2], img.Pix[n-1], img.Pix[n] = 0x10, 0x10, 0x12, 0xFF
		}
		return img
	}
	v.last = t
	v.lastSize = v.Size()
	img := renderPlane(v.scene, t, *v.opt, &v.cache)
	if v.refA != nil && v.refB != nil {
		drawRect(img, t, review.NewRect(*v.refA, *v.refB, t.U, t.V))
	} else if v.refShown != nil {
		if r := v.refShown(); r != nil {
			drawRect(img, t, r)
		}
	}
	return img
}

// drawRect outlines r (projected onto the view) with a dotted white line.
func drawRect(img *image.RGBA, t viewTransform, r *review.Rect) {
	c := r.Corners()
	for n := range 4 {
		x0, y0 := t.Pixel(c[n])
		x1, y1 := t.Pixel(c[(n+1)%4])
		steps := int(math.Max(math.Abs(x1-x0), math.Abs(y1-y0))) + 1
		for s := 0; s <= steps; s++ {
			if s%6 >= 3 {
				continue
			}
			f := float64(s) / float64(steps)
			x, y := int(x0+f*(x1-x0)), int(y0+f*(y1-y0))
			for _, p := range []image.Point{{x, y}, {x + 1, y}, {x, y + 1}} {
				if p.In(img.Rect) {
					img.Set(p.X, p.Y, color.RGBA{0xFF, 0xFF, 0xFF, 0xFF})
				}
			}
		}
	}
}

// pointAt returns the patient position under widget position pos.
func (v *sliceViewer) pointAt(pos fyne.Position) (dosemap.Vec3, bool) {
	if v.last.W == 0 || v.lastSize.Width == 0 {
		t, ok := v.transform(int(v.Size().Width), int(v.Size().Height))
		if !ok {
			return dosemap.Vec3{}, false
		}
		return t.At(float64(pos.X), float64(pos.Y)), true
	}
	sx := float64(v.last.W) / float64(v.lastSize.Width)
	sy := float64(v.last.H) / float64(v.lastSize.Height)
	return v.last.At(float64(pos.X)*sx, float64(pos.Y)*sy), true
}

// CreateRenderer implements fyne.Widget.
func (v *sliceViewer) CreateRenderer() fyne.WidgetRenderer {
	return widget.NewSimpleRenderer(v.raster)
}

// MinSize keeps the viewer usable in small windows.
func (v *sliceViewer) MinSize() fyne.Size { return fyne.NewSize(260, 200) }

// Scrolled changes the slice with the mouse wheel.
func (v *sliceViewer) Scrolled(ev *fyne.ScrollEvent) {
	switch {
	case ev.Scrolled.DY > 0:
		v.setSlice(v.slice + 1)
	case ev.Scrolled.DY < 0:
		v.setSlice(v.slice - 1)
	}
}

// Tapped pins the probe at the clicked point.
func (v *sliceViewer) Tapped(ev *fyne.PointEvent) {
	v.focus()
	if p, ok := v.pointAt(ev.Position); ok && v.onPin != nil {
		v.onPin(p)
	}
}

func (v *sliceViewer) focus() {
	if c := fyne.CurrentApp().Driver().CanvasForObject(v); c != nil {
		c.Focus(v)
	}
	if v.onFocus != nil {
		v.onFocus(v)
	}
}

// MouseDown records whether a drag changes window/level (Shift held).
func (v *sliceViewer) MouseDown(ev *desktop.MouseEvent) {
	v.dragWL = ev.Modifier&fyne.KeyModifierShift != 0
	v.wlFrom = ev.Position
	v.wlStarted = ev.Button == desktop.MouseButtonSecondary
}

// MouseUp ends a window/level drag.
func (v *sliceViewer) MouseUp(*desktop.MouseEvent) { v.wlStarted = false }

// MouseIn implements desktop.Hoverable.
func (v *sliceViewer) MouseIn(ev *desktop.MouseEvent) { v.MouseMoved(ev) }

// MouseMoved reports the hovered point; with the right button held it
// changes window and level.
func (v *sliceViewer) MouseMoved(ev *desktop.MouseEvent) {
	if ev.Button == desktop.MouseButtonSecondary && v.wlStarted {
		v.adjustWindow(ev.Position.X-v.wlFrom.X, ev.Position.Y-v.wlFrom.Y)
		v.wlFrom = ev.Position
		return
	}
	if v.onHover != nil {
		p, ok := v.pointAt(ev.Position)
		v.onHover(p, ok)
	}
}

// MouseOut implements desktop.Hoverable.
func (v *sliceViewer) MouseOut() {
	if v.onHover != nil {
		v.onHover(dosemap.Vec3{}, false)
	}
}

// Dragged pans, changes window/level when Shift was held, or draws the
// drift reference rectangle in reference mode.
func (v *sliceViewer) Dragged(ev *fyne.DragEvent) {
	if v.refMode {
		if v.refA == nil {
			if p, ok := v.pointAt(ev.Position.Subtract(ev.Dragged)); ok {
				v.refA = &p
			}
		}
		if p, ok := v.pointAt(ev.Position); ok {
			v.refB = &p
		}
		v.raster.Refresh()
		return
	}
	if v.dragWL {
		v.adjustWindow(ev.Dragged.DX, ev.Dragged.DY)
		return
	}
	if v.last.W == 0 || v.lastSize.Width == 0 {
		return
	}
	mm := v.last.MMPerPixel * float64(v.last.W) / float64(v.lastSize.Width)
	v.panU -= float64(ev.Dragged.DX) * mm
	v.panV -= float64(ev.Dragged.DY) * mm
	v.raster.Refresh()
}

// DragEnd ends a drag; in reference mode it hands over the rectangle.
func (v *sliceViewer) DragEnd() {
	v.dragWL = false
	if v.refMode && v.refA != nil && v.refB != nil {
		a, b := *v.refA, *v.refB
		v.refA, v.refB = nil, nil
		if v.onRef != nil {
			v.onRef(a, b, v.last.U, v.last.V)
		}
		v.raster.Refresh()
	}
}

// adjustWindow changes the window width with horizontal motion and the
// level with vertical motion, proportionally to the current width.
func (v *sliceViewer) adjustWindow(dx, dy float32) {
	w := math.Max(v.opt.WindowWidth, 1)
	v.opt.WindowWidth = math.Max(1, w*(1+float64(dx)/200))
	v.opt.WindowCentre += float64(dy) * w / 400
	if v.onWindow != nil {
		v.onWindow()
	}
}

// zoomBy multiplies the zoom by f, between fit and 16×.
func (v *sliceViewer) zoomBy(f float64) {
	v.zoom = math.Max(1, math.Min(16, v.zoom*f))
	if v.zoom == 1 {
		v.panU, v.panV = 0, 0
	}
	v.raster.Refresh()
}

// resetView returns to the whole plane.
func (v *sliceViewer) resetView() {
	v.zoom, v.panU, v.panV = 1, 0, 0
	v.raster.Refresh()
}

// FocusGained implements fyne.Focusable.
func (v *sliceViewer) FocusGained() {}

// FocusLost implements fyne.Focusable.
func (v *sliceViewer) FocusLost() {}

// TypedRune handles the zoom keys.
func (v *sliceViewer) TypedRune(r rune) {
	switch r {
	case '+', '=':
		v.zoomBy(1.25)
	case '-':
		v.zoomBy(0.8)
	case '0':
		v.resetView()
	}
}

// TypedKey handles the slice keys (Escape leaves reference drawing).
func (v *sliceViewer) TypedKey(ev *fyne.KeyEvent) {
	switch ev.Name {
	case fyne.KeyEscape:
		if v.refMode {
			v.refMode = false
			v.refA, v.refB = nil, nil
			v.raster.Refresh()
		}
	case fyne.KeyUp, fyne.KeyRight:
		v.setSlice(v.slice + 1)
	case fyne.KeyDown, fyne.KeyLeft:
		v.setSlice(v.slice - 1)
	case fyne.KeyPageUp:
		v.setSlice(v.slice + 5)
	case fyne.KeyPageDown:
		v.setSlice(v.slice - 5)
	case fyne.KeyHome:
		v.setSlice(0)
	case fyne.KeyEnd:
		v.setSlice(v.slices() - 1)
	}
}

package view

import (
	"fmt"
	"image"
	"image/color"
	"math"
)

// Colours of the legend panels.
var (
	panelColor = color.RGBA{0x16, 0x17, 0x1b, 0xFF}
	textColor  = color.RGBA{0xEE, 0xEE, 0xEE, 0xFF}
	dimColor   = color.RGBA{0xB0, 0xB0, 0xB0, 0xFF}
)

// ColorBar returns a w×h legend of the dose colourwash: the viridis ramp on
// its logarithmic scale from Floor (bottom) to Ceiling (top), labelled at
// every decade (and at Floor and Ceiling), with the lethal level marked by
// a white bar and its value when lethal > 0. The unit is CEM43 minutes.
// Doses below the floor are drawn without colour, as the legend notes.
func ColorBar(s DoseScale, lethal float64, w, h int) (*image.RGBA, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	if w < 60 || h < 120 {
		return nil, fmt.Errorf("colour bar of %d×%d pixels is too small (at least 60×120)", w, h)
	}
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	fillRect(img, img.Rect, panelColor, 1)
	size := 13.0
	drawText(img, "CEM43", size, w/2, 6, anchorTop, textColor)
	_, th := textSize("CEM43", size)
	top := 6 + th + 12
	bottom := h - 2*th - 14
	barX0, barX1 := 12, 12+max(14, w/6)
	for y := top; y <= bottom; y++ {
		t := float64(bottom-y) / float64(bottom-top)
		fillRect(img, image.Rect(barX0, y, barX1, y+1), Colormap(t), 1)
	}
	cv := newCanvas(img, nil)
	yOf := func(d float64) float64 {
		return float64(bottom) - s.T(d)*float64(bottom-top)
	}
	ticks := []float64{s.Floor}
	for e := math.Ceil(math.Log10(s.Floor)); math.Pow(10, e) <= s.Ceiling*(1+1e-9); e++ {
		if d := math.Pow(10, e); d > s.Floor*(1+1e-9) && d < s.Ceiling*(1-1e-9) {
			ticks = append(ticks, d)
		}
	}
	ticks = append(ticks, s.Ceiling)
	for _, d := range ticks {
		y := math.Round(yOf(d)) + 0.5
		cv.capsule(float64(barX1), y, float64(barX1+5), y, 0.6)
		cv.flush(textColor, 1)
		drawText(img, formatDose(d), size, barX1+8, int(y), anchorLeft, dimColor)
	}
	if lethal >= s.Floor && lethal <= s.Ceiling {
		y := math.Round(yOf(lethal)) + 0.5
		cv.capsule(float64(barX0-4), y, float64(barX1+4), y, 1.75)
		cv.flush(haloColor, 1)
		cv.capsule(float64(barX0-4), y, float64(barX1+4), y, 1)
		cv.flush(ColorLethal, 1)
		drawText(img, formatDose(lethal)+" lethal", size, barX1+8, int(y), anchorLeft, textColor)
	}
	drawText(img, fmt.Sprintf("below %s:", formatDose(s.Floor)), 11, 8, h-th-8, anchorBottomLeft, dimColor)
	drawText(img, "no colour", 11, 8, h-6, anchorBottomLeft, dimColor)
	return img, nil
}

func formatDose(d float64) string {
	switch {
	case d >= 10000:
		return fmt.Sprintf("%.0e", d)
	case d >= 1:
		return fmt.Sprintf("%.0f", d)
	}
	return fmt.Sprintf("%.2g", d)
}

// keyItem is one entry of the overlay key.
type keyItem struct {
	Label string
	draw  func(img *image.RGBA, cv *canvas, r image.Rectangle, st Style)
}

// keyItems lists the overlays in drawing order with their swatches.
func keyItems() []keyItem {
	line := func(width float64, style LineStyle, col color.RGBA) func(*image.RGBA, *canvas, image.Rectangle, Style) {
		return func(img *image.RGBA, cv *canvas, r image.Rectangle, st Style) {
			y := float64(r.Min.Y+r.Max.Y) / 2
			cv.stroke([]Point{{float64(r.Min.X) + 3, y}, {float64(r.Max.X) - 3, y}}, false, width, style, col)
		}
	}
	patch := func(pattern func(x, y int) float64, col color.RGBA) func(*image.RGBA, *canvas, image.Rectangle, Style) {
		return func(img *image.RGBA, cv *canvas, r image.Rectangle, st Style) {
			for y := r.Min.Y; y < r.Max.Y; y++ {
				for x := r.Min.X; x < r.Max.X; x++ {
					blend(img.Pix[img.PixOffset(x, y):], col, int(pattern(x, y)*255+0.5))
				}
			}
			pts := []Point{{float64(r.Min.X) + 0.5, float64(r.Min.Y) + 0.5}, {float64(r.Max.X) - 0.5, float64(r.Min.Y) + 0.5},
				{float64(r.Max.X) - 0.5, float64(r.Max.Y) - 0.5}, {float64(r.Min.X) + 0.5, float64(r.Max.Y) - 0.5}}
			cv.polyline(pts, true, 1.2, Solid)
			cv.flush(col, 1)
		}
	}
	st := DefaultStyle()
	return []keyItem{
		{"Lethal isodose", line(st.Lethal, Solid, ColorLethal)},
		{"Target", line(st.Target, Solid, ColorTarget)},
		{"Safety margin", line(st.Margin, Dashed, ColorMargin)},
		{"Avoid structure", line(st.Avoid, Dotted, ColorAvoid)},
		{"Hole: target below lethal", patch(hatch, ColorHole)},
		{"Lethal outside margin", patch(func(x, y int) float64 { return st.FillOpacity }, ColorSpill)},
		{"Not monitored", func(img *image.RGBA, cv *canvas, r image.Rectangle, st Style) {
			fillRect(img, r, haloColor, 0.55)
			patch(crossHatch, ColorNotMonitored)(img, cv, r, st)
		}},
	}
}

// OverlayKey returns a legend of the overlays, w pixels wide: a swatch in
// each overlay's colour and line style or fill pattern, and its name. The
// styles differ in more than hue (solid, dashed, dotted, hatched, filled,
// cross-hatched), so the key reads without colour vision.
func OverlayKey(st Style, w int) *image.RGBA {
	items := keyItems()
	const size, rowH, pad = 13.0, 24, 8
	w = max(w, 160)
	h := 2*pad + rowH*len(items)
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	fillRect(img, img.Rect, panelColor, 1)
	cv := newCanvas(img, nil)
	for n, it := range items {
		y0 := pad + n*rowH
		sw := image.Rect(pad, y0+4, pad+44, y0+rowH-4)
		// Swatches sit on mid grey, like overlays on anatomy.
		fillRect(img, sw, color.RGBA{0x55, 0x55, 0x58, 0xFF}, 1)
		it.draw(img, cv, sw, st)
		drawText(img, it.Label, size, sw.Max.X+10, y0+rowH/2, anchorLeft, textColor)
	}
	return img
}

// WashScale returns the dose colourwash of the window and the reports for
// lethal threshold threshold (in the model's unit): colour from a hundredth
// of the threshold to eight times it, on a logarithmic scale, at 55 %
// opacity. Both draw their colour bar (WashBar) on this one scale, so the
// same dose has the same colour everywhere.
func WashScale(threshold float64) DoseScale {
	if !(threshold > 0) {
		return DefaultDoseScale()
	}
	return DoseScale{Floor: threshold / 100, Ceiling: 8 * threshold, Opacity: 0.55}
}

// WashBar returns the horizontal w×h colour bar of scale s shared by the
// review window and the reports: the ramp of the dose wash from Floor
// (left) to Ceiling (right), labelled at Floor, at every decade between
// and at Ceiling, with the lethal threshold marked by a white bar with a
// dark halo and labelled when lethal lies on the scale. A title line above
// the ramp names the unit.
func WashBar(s DoseScale, lethal float64, unit string, w, h int) (*image.RGBA, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	if w < 160 || h < 60 {
		return nil, fmt.Errorf("colour bar of %d×%d pixels is too small (at least 160×60)", w, h)
	}
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	fillRect(img, img.Rect, panelColor, 1)
	const size = 12.0
	_, th := textSize("0", size)
	pad := 10
	x0, x1 := pad, w-pad
	drawText(img, "Dose, "+unit+" (log scale)", size, x0, 3, anchorTopLeft, textColor)
	barTop, barBot := th+10, h-th-8
	xOf := func(d float64) float64 { return float64(x0) + s.T(d)*float64(x1-x0) }
	for x := x0; x < x1; x++ {
		fillRect(img, image.Rect(x, barTop, x+1, barBot), Colormap(float64(x-x0)/float64(x1-x0-1)), 1)
	}
	cv := newCanvas(img, nil)
	ticks := []float64{s.Floor}
	for e := math.Ceil(math.Log10(s.Floor)); math.Pow(10, e) <= s.Ceiling*(1+1e-9); e++ {
		if d := math.Pow(10, e); d > s.Floor*2.5 && d < s.Ceiling/2.5 {
			ticks = append(ticks, d)
		}
	}
	ticks = append(ticks, s.Ceiling)
	for n, d := range ticks {
		x := math.Round(xOf(d)) + 0.5
		cv.capsule(x, float64(barBot), x, float64(barBot+3), 0.6)
		cv.flush(textColor, 1)
		a := anchorTop
		label := FormatDose(d)
		switch n {
		case 0:
			a, x = anchorTopLeft, float64(x0)
		case len(ticks) - 1:
			a, x = anchorTopRight, float64(x1)
		}
		if lethal > 0 && math.Abs(s.T(d)-s.T(lethal)) < 0.1 && n != 0 && n != len(ticks)-1 {
			continue // the lethal label stands there
		}
		drawText(img, label, size, int(x), barBot+4, a, dimColor)
	}
	if lethal >= s.Floor && lethal <= s.Ceiling {
		x := math.Round(xOf(lethal)) + 0.5
		cv.capsule(x, float64(barTop-2), x, float64(barBot+2), 2.5)
		cv.flush(haloColor, 1)
		cv.capsule(x, float64(barTop-2), x, float64(barBot+2), 1.25)
		cv.flush(ColorLethal, 1)
		drawText(img, FormatDose(lethal)+" lethal", size, int(x), barBot+4, anchorTop, textColor)
	}
	return img, nil
}

// FormatDose prints a dose for legends and tables, one format everywhere:
// whole numbers from 10 to a million, two significant digits otherwise,
// "0" for zero (never "-0"), "—" for unknown.
func FormatDose(d float64) string {
	switch {
	case d == 0:
		return "0"
	case math.IsNaN(d):
		return "—"
	case math.Abs(d) >= 1e6:
		return fmt.Sprintf("%.2g", d)
	case math.Abs(d) >= 10:
		return fmt.Sprintf("%.0f", d)
	}
	return fmt.Sprintf("%.2g", d)
}

package view

import (
	"image"
	"image/color"
	"sync"

	"codeberg.org/go-fonts/liberation/liberationsansbold"
	"golang.org/x/image/font"
	"golang.org/x/image/font/opentype"
	"golang.org/x/image/math/fixed"
)

// Labels are set in Liberation Sans Bold (SIL Open Font License), metric
// compatible with the common sans-serif faces, at whole-pixel sizes.

var (
	fontOnce  sync.Once
	fontData  *opentype.Font
	fontErr   error
	labelMu   sync.Mutex
	faces     = map[float64]font.Face{}
	labelMemo = map[labelKey]*label{}
)

type labelKey struct {
	text string
	size float64
}

// label is a rasterised string: its glyph coverage and a dilated halo, both
// as alpha masks of the same size, and the baseline offset from the top.
type label struct {
	glyph, halo *image.Alpha
	ascent      int
}

// face returns the label face at size pixels, or nil if the embedded font
// cannot be parsed (then labels are left out rather than failing a render).
func face(size float64) font.Face {
	fontOnce.Do(func() { fontData, fontErr = opentype.Parse(liberationsansbold.TTF) })
	if fontErr != nil {
		return nil
	}
	if f, ok := faces[size]; ok {
		return f
	}
	f, err := opentype.NewFace(fontData, &opentype.FaceOptions{Size: size, DPI: 72, Hinting: font.HintingFull})
	if err != nil {
		return nil
	}
	faces[size] = f
	return f
}

// haloRadius is the width in pixels of the dark outline around letters.
const haloRadius = 2

// getLabel returns the cached rasterisation of text at size pixels.
func getLabel(text string, size float64) *label {
	labelMu.Lock()
	defer labelMu.Unlock()
	k := labelKey{text, size}
	if l, ok := labelMemo[k]; ok {
		return l
	}
	f := face(size)
	if f == nil {
		return nil
	}
	m := f.Metrics()
	adv := font.MeasureString(f, text)
	pad := haloRadius + 1
	w := adv.Ceil() + 2*pad
	h := (m.Ascent + m.Descent).Ceil() + 2*pad
	g := image.NewAlpha(image.Rect(0, 0, w, h))
	d := font.Drawer{Dst: g, Src: image.Opaque, Face: f,
		Dot: fixed.Point26_6{X: fixed.I(pad), Y: fixed.I(pad) + m.Ascent}}
	d.DrawString(text)
	halo := image.NewAlpha(g.Rect)
	r := haloRadius
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			var best uint8
			for dy := -r; dy <= r; dy++ {
				for dx := -r; dx <= r; dx++ {
					if dx*dx+dy*dy > r*r+1 {
						continue
					}
					xx, yy := x+dx, y+dy
					if xx < 0 || yy < 0 || xx >= w || yy >= h {
						continue
					}
					if v := g.Pix[yy*g.Stride+xx]; v > best {
						best = v
					}
				}
			}
			halo.Pix[y*halo.Stride+x] = best
		}
	}
	l := &label{glyph: g, halo: halo, ascent: pad + m.Ascent.Ceil()}
	labelMemo[k] = l
	return l
}

// Anchor says which point of a label's box is placed at the given position.
type anchor int

const (
	anchorTopLeft anchor = iota
	anchorTop
	anchorTopRight
	anchorLeft
	anchorCentre
	anchorRight
	anchorBottomLeft
	anchorBottom
	anchorBottomRight
)

// textSize returns the width and height in pixels of text's box (without
// halo padding).
func textSize(text string, size float64) (int, int) {
	l := getLabel(text, size)
	if l == nil {
		return 0, 0
	}
	p := haloRadius + 1
	return l.glyph.Rect.Dx() - 2*p, l.glyph.Rect.Dy() - 2*p
}

// drawText draws text at (x, y) with the given anchor, in colour col over a
// dark halo.
func drawText(img *image.RGBA, text string, size float64, x, y int, a anchor, col color.RGBA) {
	l := getLabel(text, size)
	if l == nil {
		return
	}
	p := haloRadius + 1
	w, h := l.glyph.Rect.Dx()-2*p, l.glyph.Rect.Dy()-2*p
	switch a % 3 {
	case 1:
		x -= w / 2
	case 2:
		x -= w
	}
	switch a / 3 {
	case 1:
		y -= h / 2
	case 2:
		y -= h
	}
	x -= p
	y -= p
	composite(img, l.halo, x, y, haloColor, 0.8)
	composite(img, l.glyph, x, y, col, 1)
}

// composite blends colour col through mask m placed with its top-left at
// (x, y).
func composite(img *image.RGBA, m *image.Alpha, x, y int, col color.RGBA, alpha float64) {
	r := m.Rect.Add(image.Pt(x, y)).Intersect(img.Rect)
	a := int(alpha*256 + 0.5)
	for yy := r.Min.Y; yy < r.Max.Y; yy++ {
		pix := img.Pix[img.PixOffset(r.Min.X, yy):]
		mrow := m.Pix[(yy-y)*m.Stride:]
		for xx := r.Min.X; xx < r.Max.X; xx++ {
			blend(pix, col, int(mrow[xx-x])*a>>8)
			pix = pix[4:]
		}
	}
}

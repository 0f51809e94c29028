//go:build cgo

package main

import (
	"fmt"
	"image"
	"image/color"
	"math"

	"dosecover/dosemap"
	"dosecover/review"

	"golang.org/x/image/font"
	"golang.org/x/image/font/basicfont"
	"golang.org/x/image/math/fixed"
)

// sceneLayers is everything the viewer can draw for one case.
type sceneLayers struct {
	Anatomy   *dosemap.Volume // nil: no anatomy series
	Dose      *dosemap.Volume // cumulative (or selected sonication's) dose; nil before analysis
	Threshold float64         // lethal threshold, Dose's unit
	// Masks, each on its own grid (value >= 0.5 inside); nil when absent.
	Target, Margin, Holes, Outside, Avoid *dosemap.Volume
	NotMonitored                          *dosemap.Volume
	TargetStructure                       *dosemap.Structure
	AvoidStructures                       []*dosemap.Structure
}

// maskSampler reads a mask volume at display pixels by nearest voxel.
type maskSampler struct {
	v         *dosemap.Volume
	o, dx, dy [3]float64
}

func newMaskSampler(v *dosemap.Volume, t viewTransform) *maskSampler {
	if v == nil {
		return nil
	}
	m := &maskSampler{v: v}
	m.o, m.dx, m.dy = affineVoxel(v.Geometry, t)
	return m
}

// at reports whether display pixel (x, y) lies in the mask.
func (m *maskSampler) at(x, y int) bool {
	if m == nil {
		return false
	}
	fx, fy := float64(x), float64(y)
	i := int(math.Round(m.o[0] + fx*m.dx[0] + fy*m.dy[0]))
	j := int(math.Round(m.o[1] + fx*m.dx[1] + fy*m.dy[1]))
	k := int(math.Round(m.o[2] + fx*m.dx[2] + fy*m.dy[2]))
	if !m.v.Contains(i, j, k) {
		return false
	}
	return m.v.Data[m.v.Index(i, j, k)] >= 0.5
}

// displayOptions are the viewer's display choices.
type displayOptions struct {
	WindowCentre, WindowWidth float64
	Opacity                   float64 // 0..1 of the dose colourwash
	Floor                     float64 // dose below which the wash is transparent
	ShowDose, ShowContours    bool
	ShowHoles                 bool
	Marker                    *dosemap.Vec3 // pinned probe point, drawn as a cross
}

// renderPlane composites one view. The review window uses the shared
// renderer of the review packages when the build has it (see backend files);
// renderPlaneBasic draws the same layers with plain per-pixel sampling.
// cache holds the renderer's state between calls for one viewer.
var renderPlane func(s *sceneLayers, t viewTransform, opt displayOptions, cache *any) *image.RGBA = func(s *sceneLayers, t viewTransform, opt displayOptions, _ *any) *image.RGBA {
	return renderPlaneBasic(s, t, opt)
}

// doseWash maps a dose to the colourwash on a log scale from floor to
// top: a blue–grey–yellow ramp of increasing lightness (after the
// "cividis" map, Nuñez et al., PLoS ONE 2018), which stays ordered under
// the common colour-vision deficiencies.
func doseWash(d, floor, top float64) (color.RGBA, bool) {
	if !(d >= floor) || floor <= 0 {
		return color.RGBA{}, false
	}
	f := math.Log(d/floor) / math.Log(top/floor)
	if f > 1 {
		f = 1
	}
	stops := [...][3]float64{{0, 32, 77}, {64, 77, 108}, {124, 123, 120}, {188, 175, 111}, {255, 233, 69}}
	x := f * float64(len(stops)-1)
	i := int(x)
	if i >= len(stops)-1 {
		i = len(stops) - 2
	}
	t := x - float64(i)
	a, b := stops[i], stops[i+1]
	return color.RGBA{
		uint8(a[0] + t*(b[0]-a[0])), uint8(a[1] + t*(b[1]-a[1])), uint8(a[2] + t*(b[2]-a[2])), 255,
	}, true
}

// washColour is the colour of dose d in the wash legend; it follows
// renderPlane.
var washColour = func(d, floor, top float64) color.RGBA {
	c, _ := doseWash(d, floor, top)
	return c
}

// washTop is the dose drawn at full colour: eight times the threshold.
func washTop(threshold float64) float64 { return 8 * threshold }

const (
	bitTarget = 1 << iota
	bitMargin
	bitLethal
	bitHole
	bitOutside
	bitAvoid
	bitUnmonitored
)

// affineVoxel returns the voxel coordinate of pixel (0.5, 0.5) of t on g and
// its steps per pixel in x and y.
func affineVoxel(g dosemap.Geometry, t viewTransform) (o, dx, dy [3]float64) {
	o[0], o[1], o[2] = g.Voxel(t.At(0.5, 0.5))
	var a, b [3]float64
	a[0], a[1], a[2] = g.Voxel(t.At(1.5, 0.5))
	b[0], b[1], b[2] = g.Voxel(t.At(0.5, 1.5))
	for n := range 3 {
		dx[n] = a[n] - o[n]
		dy[n] = b[n] - o[n]
	}
	return
}

func renderPlaneBasic(s *sceneLayers, t viewTransform, opt displayOptions) *image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, t.W, t.H))
	bg := color.RGBA{0x10, 0x10, 0x12, 0xFF}
	for n := 0; n < len(img.Pix); n += 4 {
		img.Pix[n], img.Pix[n+1], img.Pix[n+2], img.Pix[n+3] = bg.R, bg.G, bg.B, bg.A
	}
	if t.W <= 0 || t.H <= 0 {
		return img
	}
	lo := opt.WindowCentre - opt.WindowWidth/2
	ww := opt.WindowWidth
	if ww <= 0 {
		ww = 1
	}
	if s.Anatomy != nil {
		o, dx, dy := affineVoxel(s.Anatomy.Geometry, t)
		for y := 0; y < t.H; y++ {
			for x := 0; x < t.W; x++ {
				fx, fy := float64(x), float64(y)
				v := s.Anatomy.SampleVoxel(o[0]+fx*dx[0]+fy*dy[0], o[1]+fx*dx[1]+fy*dy[1], o[2]+fx*dx[2]+fy*dy[2])
				if v != v {
					continue
				}
				g := (float64(v) - lo) / ww
				g = math.Max(0, math.Min(1, g))
				c := uint8(g*255 + 0.5)
				p := img.PixOffset(x, y)
				img.Pix[p], img.Pix[p+1], img.Pix[p+2] = c, c, c
			}
		}
	}
	if s.Dose == nil {
		drawFrame(img, t)
		return img
	}
	g := s.Dose.Geometry
	o, dx, dy := affineVoxel(g, t)
	bits := make([]uint8, t.W*t.H)
	top := washTop(s.Threshold)
	target, margin := newMaskSampler(s.Target, t), newMaskSampler(s.Margin, t)
	holes, outside, avoid := newMaskSampler(s.Holes, t), newMaskSampler(s.Outside, t), newMaskSampler(s.Avoid, t)
	for y := 0; y < t.H; y++ {
		for x := 0; x < t.W; x++ {
			fx, fy := float64(x), float64(y)
			ci, cj, ck := o[0]+fx*dx[0]+fy*dy[0], o[1]+fx*dx[1]+fy*dy[1], o[2]+fx*dx[2]+fy*dy[2]
			i, j, k := int(math.Round(ci)), int(math.Round(cj)), int(math.Round(ck))
			d := math.NaN()
			if g.Contains(i, j, k) {
				d = float64(s.Dose.Data[g.Index(i, j, k)])
			}
			var b uint8
			if target.at(x, y) {
				b |= bitTarget
				if d != d {
					b |= bitUnmonitored
				}
			}
			if margin.at(x, y) {
				b |= bitMargin
			}
			if d >= s.Threshold {
				b |= bitLethal
			}
			if holes.at(x, y) {
				b |= bitHole
			}
			if outside.at(x, y) {
				b |= bitOutside
			}
			if avoid.at(x, y) {
				b |= bitAvoid
			}
			bits[y*t.W+x] = b
			if opt.ShowDose {
				dv := float64(s.Dose.SampleVoxel(ci, cj, ck))
				if c, ok := doseWash(dv, opt.Floor, top); ok {
					blend(img, x, y, c, opt.Opacity)
				}
			}
		}
	}
	// Fills: holes hatched, lethal outside the margin filled, unmonitored
	// target cross-hatched.
	for y := 0; y < t.H; y++ {
		for x := 0; x < t.W; x++ {
			b := bits[y*t.W+x]
			switch {
			case opt.ShowHoles && b&bitHole != 0 && (x+y)%6 < 2:
				blend(img, x, y, review.ColorHole, 0.9)
			case opt.ShowHoles && b&bitOutside != 0:
				blend(img, x, y, review.ColorSpill, 0.55)
			case b&bitUnmonitored != 0 && ((x+y)%8 == 0 || (x-y+8000)%8 == 0):
				blend(img, x, y, review.ColorNotMonitored, 0.9)
			}
		}
	}
	// Outlines: a pixel lies on the boundary of a layer when its right or
	// lower neighbour differs in that bit.
	edge := func(x, y int, bit uint8) bool {
		b := bits[y*t.W+x] & bit
		if x+1 < t.W && bits[y*t.W+x+1]&bit != b {
			return true
		}
		if y+1 < t.H && bits[(y+1)*t.W+x]&bit != b {
			return true
		}
		return false
	}
	for y := 0; y < t.H; y++ {
		for x := 0; x < t.W; x++ {
			if opt.ShowContours {
				if edge(x, y, bitAvoid) && (x+y)%4 < 2 {
					dot(img, x, y, review.ColorAvoid, 1)
				}
				if edge(x, y, bitMargin) && (x+y)%10 < 6 {
					dot(img, x, y, review.ColorMargin, 1)
				}
				if edge(x, y, bitTarget) {
					dot(img, x, y, review.ColorTarget, 1)
				}
			}
			if opt.ShowDose && edge(x, y, bitLethal) {
				dot(img, x, y, review.ColorLethal, 1)
			}
		}
	}
	if opt.Marker != nil {
		mx, my := t.Pixel(*opt.Marker)
		drawCross(img, int(mx), int(my), color.RGBA{0xFF, 0xFF, 0xFF, 0xFF})
	}
	drawFrame(img, t)
	return img
}

// blend mixes c into pixel (x, y) with weight a.
func blend(img *image.RGBA, x, y int, c color.RGBA, a float64) {
	p := img.PixOffset(x, y)
	img.Pix[p] = uint8(float64(img.Pix[p])*(1-a) + float64(c.R)*a)
	img.Pix[p+1] = uint8(float64(img.Pix[p+1])*(1-a) + float64(c.G)*a)
	img.Pix[p+2] = uint8(float64(img.Pix[p+2])*(1-a) + float64(c.B)*a)
}

// dot paints pixel (x, y) and its right and lower neighbours, which gives
// outlines two pixels wide; w > 1 widens further.
func dot(img *image.RGBA, x, y int, c color.RGBA, w int) {
	b := img.Bounds()
	for yy := y; yy <= y+w; yy++ {
		for xx := x; xx <= x+w; xx++ {
			if image.Pt(xx, yy).In(b) {
				img.SetRGBA(xx, yy, c)
			}
		}
	}
}

func drawCross(img *image.RGBA, x, y int, c color.RGBA) {
	b := img.Bounds()
	for d := -9; d <= 9; d++ {
		if d > -3 && d < 3 {
			continue
		}
		for _, p := range []image.Point{{x + d, y}, {x, y + d}, {x + d, y + 1}, {x + 1, y + d}} {
			if p.In(b) {
				img.SetRGBA(p.X, p.Y, c)
			}
		}
	}
}

// drawFrame adds the orientation letters and a scale bar.
func drawFrame(img *image.RGBA, t viewTransform) {
	if t.W < 60 || t.H < 60 {
		return
	}
	white := color.RGBA{0xF0, 0xF0, 0xF0, 0xFF}
	label(img, t.W/2-3, 16, orientationLetter(t.V.Scale(-1)), white)
	label(img, t.W/2-3, t.H-6, orientationLetter(t.V), white)
	label(img, 6, t.H/2+4, orientationLetter(t.U.Scale(-1)), white)
	label(img, t.W-12, t.H/2+4, orientationLetter(t.U), white)
	// Scale bar: the largest of 1-2-5 × 10^n mm that fits in a fifth of
	// the width.
	maxMM := float64(t.W) / 5 * t.MMPerPixel
	bar := 1.0
	for _, m := range []float64{1, 2, 5, 10, 20, 50, 100, 200, 500} {
		if m <= maxMM {
			bar = m
		}
	}
	px := int(bar / t.MMPerPixel)
	x0, y0 := 14, t.H-18
	for x := x0; x < x0+px; x++ {
		for y := y0; y < y0+3; y++ {
			img.SetRGBA(x, y, white)
		}
	}
	for y := y0 - 5; y < y0+3; y++ {
		img.SetRGBA(x0, y, white)
		img.SetRGBA(x0+px-1, y, white)
	}
	label(img, x0+px+6, y0+4, fmt.Sprintf("%g mm", bar), white)
}

// label draws s with a dark shadow, baseline at (x, y).
func label(img *image.RGBA, x, y int, s string, c color.RGBA) {
	for _, o := range []struct {
		dx, dy int
		c      color.RGBA
	}{{1, 1, color.RGBA{0, 0, 0, 0xFF}}, {0, 0, c}} {
		d := font.Drawer{Dst: img, Src: image.NewUniform(o.c), Face: basicfont.Face7x13,
			Dot: fixed.P(x+o.dx, y+o.dy)}
		d.DrawString(s)
	}
}

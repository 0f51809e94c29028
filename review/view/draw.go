package view

import (
	"image"
	"image/color"
	"math"
)

// LineStyle says how a polyline is stroked. Line styles keep overlays
// apart without relying on hue.
type LineStyle int

// Line styles.
const (
	Solid  LineStyle = iota
	Dashed           // dashes of 4 line widths with gaps of 2.5 line widths
	Dotted           // round dots every 2.5 line widths
)

// canvas draws anti-aliased strokes on an RGBA image. A stroke first
// accumulates its coverage (the maximum over its pieces) in a scratch
// buffer and is composited once, so joints and overlapping dashes do not
// darken.
//
// The pixels touched since the last flush are kept as one span per row
// (lo[y] to hi[y], image coordinates), so that flushing a long thin stroke
// visits only the pixels near it rather than its whole bounding box.
type canvas struct {
	img    *image.RGBA
	cov    []uint8
	dirty  image.Rectangle // rows y0..y1 with spans; columns unused
	lo, hi []int32         // per row of the image: touched columns [lo, hi)
}

func newCanvas(img *image.RGBA, scratch []uint8) *canvas {
	n := img.Rect.Dx() * img.Rect.Dy()
	if cap(scratch) < n {
		scratch = make([]uint8, n)
	}
	scratch = scratch[:n]
	return &canvas{img: img, cov: scratch}
}

// setSpans gives the canvas the row-span buffers held in buf (reused when
// large enough) and returns the buffer to keep for the next canvas.
func (c *canvas) setSpans(buf []int32) []int32 {
	h := c.img.Rect.Dy()
	if cap(buf) < 2*h {
		buf = make([]int32, 2*h)
	}
	buf = buf[:2*h]
	c.lo, c.hi = buf[:h], buf[h:]
	for y := range c.lo {
		c.lo[y], c.hi[y] = math.MaxInt32, math.MinInt32
	}
	return buf
}

// touch records that columns [x0, x1) of rows [y0, y1) hold coverage.
func (c *canvas) touch(x0, y0, x1, y1 int) {
	if c.lo == nil {
		c.setSpans(nil)
	}
	c.dirty = c.dirty.Union(image.Rect(x0, y0, x1, y1))
	b := c.img.Rect
	for y := y0; y < y1; y++ {
		r := y - b.Min.Y
		c.lo[r] = min(c.lo[r], int32(x0))
		c.hi[r] = max(c.hi[r], int32(x1))
	}
}

// capsule adds the coverage of a segment from a to b with half-width hw
// (display pixels; pixel centres at +0.5).
func (c *canvas) capsule(ax, ay, bx, by, hw float64) {
	b := c.img.Rect
	x0 := max(b.Min.X, int(math.Floor(math.Min(ax, bx)-hw-1)))
	x1 := min(b.Max.X, int(math.Ceil(math.Max(ax, bx)+hw+1)))
	y0 := max(b.Min.Y, int(math.Floor(math.Min(ay, by)-hw-1)))
	y1 := min(b.Max.Y, int(math.Ceil(math.Max(ay, by)+hw+1)))
	if x0 >= x1 || y0 >= y1 {
		return
	}
	c.touch(x0, y0, x1, y1)
	dx, dy := bx-ax, by-ay
	l2 := dx*dx + dy*dy
	w := b.Dx()
	// Pixels whose squared distance exceeds reach² (with a margin far above
	// rounding) get no coverage; skipping them spares the square root.
	reach := hw + 0.5
	reach2 := reach * reach * (1 + 1e-9)
	for y := y0; y < y1; y++ {
		py := float64(y) + 0.5 - ay
		row := c.cov[(y-b.Min.Y)*w:]
		for x := x0; x < x1; x++ {
			px := float64(x) + 0.5 - ax
			t := 0.0
			if l2 > 0 {
				// Clamped to [0, 1] with branches: math.Max and math.Min
				// are calls on this hot path.
				t = (px*dx + py*dy) / l2
				if t < 0 {
					t = 0
				} else if t > 1 {
					t = 1
				}
			}
			ex, ey := px-t*dx, py-t*dy
			d2 := ex*ex + ey*ey
			if d2 > reach2 {
				continue
			}
			d := math.Sqrt(d2)
			cv := hw + 0.5 - d
			if cv <= 0 {
				continue
			}
			v := uint8(255)
			if cv < 1 {
				v = uint8(cv*255 + 0.5)
			}
			if i := x - b.Min.X; v > row[i] {
				row[i] = v
			}
		}
	}
}

// dot adds the coverage of a filled disc.
func (c *canvas) dot(x, y, r float64) { c.capsule(x, y, x, y, r) }

// polyline adds the coverage of a polyline of the given width and style.
func (c *canvas) polyline(pts []Point, closed bool, width float64, style LineStyle) {
	if len(pts) == 0 {
		return
	}
	hw := width / 2
	n := len(pts)
	segs := n - 1
	if closed {
		segs = n
	}
	if len(pts) == 1 {
		c.dot(pts[0].X, pts[0].Y, hw)
		return
	}
	switch style {
	case Solid:
		for s := 0; s < segs; s++ {
			a, b := pts[s], pts[(s+1)%n]
			c.capsule(a.X, a.Y, b.X, b.Y, hw)
		}
	case Dashed, Dotted:
		on, period := 4*width, 6.5*width
		if style == Dotted {
			on, period = 0, 2.5*width
		}
		// Arc length s along the polyline; the pattern restarts at 0.
		s := 0.0
		for k := 0; k < segs; k++ {
			a, b := pts[k], pts[(k+1)%n]
			l := math.Hypot(b.X-a.X, b.Y-a.Y)
			if l == 0 {
				continue
			}
			// Pattern phases that fall on this segment.
			for p := math.Floor(s/period) * period; p < s+l; p += period {
				if style == Dotted {
					if p >= s {
						f := (p - s) / l
						c.dot(a.X+f*(b.X-a.X), a.Y+f*(b.Y-a.Y), hw)
					}
					continue
				}
				t0 := math.Max(p, s)
				t1 := math.Min(p+on, s+l)
				if t1 <= t0 {
					continue
				}
				f0, f1 := (t0-s)/l, (t1-s)/l
				c.capsule(a.X+f0*(b.X-a.X), a.Y+f0*(b.Y-a.Y), a.X+f1*(b.X-a.X), a.Y+f1*(b.Y-a.Y), hw)
			}
			s += l
		}
	}
}

// flush composites the accumulated coverage in colour col with opacity
// alpha (0..1) and clears it.
func (c *canvas) flush(col color.RGBA, alpha float64) {
	d := c.dirty.Intersect(c.img.Rect)
	c.dirty = image.Rectangle{}
	if d.Empty() {
		return
	}
	b := c.img.Rect
	w := b.Dx()
	a := int(alpha*256 + 0.5)
	for y := d.Min.Y; y < d.Max.Y; y++ {
		r := y - b.Min.Y
		x0, x1 := max(int(c.lo[r]), d.Min.X), min(int(c.hi[r]), d.Max.X)
		c.lo[r], c.hi[r] = math.MaxInt32, math.MinInt32
		if x0 >= x1 {
			continue
		}
		row := c.cov[r*w:]
		pix := c.img.Pix[c.img.PixOffset(x0, y):]
		for x := x0; x < x1; x++ {
			i := x - b.Min.X
			v := int(row[i])
			if v == 0 {
				pix = pix[4:]
				continue
			}
			row[i] = 0
			blend(pix, col, v*a>>8)
			pix = pix[4:]
		}
	}
}

// blend composites the opaque colour col with alpha a (0..255) over the
// opaque pixel p (4 bytes RGBA).
func blend(p []uint8, col color.RGBA, a int) {
	if a <= 0 {
		return
	}
	if a >= 255 {
		p[0], p[1], p[2], p[3] = col.R, col.G, col.B, 0xFF
		return
	}
	b := 255 - a
	p[0] = uint8((int(col.R)*a + int(p[0])*b + 127) / 255)
	p[1] = uint8((int(col.G)*a + int(p[1])*b + 127) / 255)
	p[2] = uint8((int(col.B)*a + int(p[2])*b + 127) / 255)
	p[3] = 0xFF
}

// stroke draws a polyline with a dark halo (for contrast on bright and dark
// anatomy alike) and then the line itself.
func (c *canvas) stroke(pts []Point, closed bool, width float64, style LineStyle, col color.RGBA) {
	c.polyline(pts, closed, width+2.5, style)
	c.flush(haloColor, 0.7)
	c.polyline(pts, closed, width, style)
	c.flush(col, 1)
}

// isodoseColor draws the further isodose lines and their labels.
var isodoseColor = color.RGBA{0xD8, 0xD8, 0xD8, 0xFF}

// haloColor outlines lines and letters.
var haloColor = color.RGBA{0, 0, 0, 0xFF}

// fillRect blends a rectangle of colour col with opacity alpha.
func fillRect(img *image.RGBA, r image.Rectangle, col color.RGBA, alpha float64) {
	r = r.Intersect(img.Rect)
	a := int(alpha*255 + 0.5)
	for y := r.Min.Y; y < r.Max.Y; y++ {
		pix := img.Pix[img.PixOffset(r.Min.X, y):]
		for x := r.Min.X; x < r.Max.X; x++ {
			blend(pix, col, a)
			pix = pix[4:]
		}
	}
}

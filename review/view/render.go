package view

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"strings"

	"dosecover/dosemap"
	"dosecover/review"
)

// Scene is everything drawn on one plane. Every layer is optional: a nil
// volume or a zero Region is left out.
type Scene struct {
	Plane Plane // the plane shown; its pixels set the resolution of isolines and outlines

	Anatomy *dosemap.Volume // grey background
	Window  Window          // anatomy window; Width 0: AutoWindow(Anatomy)

	Dose     *dosemap.Volume // cumulative thermal dose, CEM43 minutes
	Scale    DoseScale       // colourwash; zero value: DefaultDoseScale()
	Lethal   float64         // lethal dose level for the thick isoline; 0: none
	Isodoses []float64       // further isodose levels, drawn thin in their wash colour
	HideWash bool            // draw the isolines without the colourwash

	Target, Margin Region   // solid and dashed outlines
	Avoid          []Region // dotted outlines
	Holes          Region   // hatched: target not reaching the lethal dose
	Spill          Region   // filled: lethal dose outside the margin
	NotMonitored   Region   // cross-hatched: no valid thermometry

	Marker *dosemap.Vec3 // crosshair at a patient point; nil: none

	Caption     string // lines of text drawn at the top left
	Annotations bool   // orientation letters and scale bar
}

// Style holds the line widths (display pixels) of the overlays. The
// defaults are DefaultStyle; colours come from the review palette.
type Style struct {
	Lethal, Target, Margin, Avoid, Outline, Isodose float64
	FillOpacity                                     float64 // spill fill
	Background                                      color.RGBA
}

// DefaultStyle returns the standard widths: lethal 3.5, target and margin
// 2.5, avoid 3 (dots), hole and spill outlines 1.5, isodoses 1.5.
func DefaultStyle() Style {
	return Style{Lethal: 3.5, Target: 2.5, Margin: 2.5, Avoid: 3, Outline: 1.5, Isodose: 1.5,
		FillOpacity: 0.45, Background: color.RGBA{0x0a, 0x0a, 0x0c, 0xFF}}
}

// Renderer composites Scenes into images. It keeps what depends only on
// the plane (samples of every volume, isolines, outlines) between calls, so
// zooming and panning redo only the per-display-pixel work, and it reuses
// its buffers. The cache is keyed by the plane, the volume and structure
// pointers and the levels: after changing a volume's data in place, call
// Invalidate. A Renderer is not safe for concurrent use.
type Renderer struct {
	Style Style

	key     cacheKey
	anat    []float32
	dose    []float32 // scale position t (NaN: no wash)
	doseRaw []float32
	lethal  []Polyline
	isos    [][]Polyline
	fields  map[regionID]*regionField
	scratch []uint8
	pts     []Point
}

type regionID struct {
	mask *dosemap.Volume
	st   *dosemap.Structure
}

type cacheKey struct {
	plane      Plane
	anat, dose *dosemap.Volume
	scale      DoseScale
	lethal     float64
	isos       string
	valid      bool
}

// NewRenderer returns a Renderer with DefaultStyle.
func NewRenderer() *Renderer {
	return &Renderer{Style: DefaultStyle(), fields: map[regionID]*regionField{}}
}

// Invalidate drops everything cached.
func (r *Renderer) Invalidate() {
	r.key = cacheKey{}
	r.fields = map[regionID]*regionField{}
}

// Render composites s as seen through v into dst and returns it; dst is
// allocated when nil or not v.Width×v.Height. It fails on an unusable
// plane, view or dose scale.
func Render(s *Scene, v View) (*image.RGBA, error) {
	return NewRenderer().Render(s, v, nil)
}

// prepare brings the per-plane cache up to date with s.
func (r *Renderer) prepare(s *Scene, sc DoseScale) {
	p := s.Plane
	k := cacheKey{plane: p, anat: s.Anatomy, dose: s.Dose, scale: sc, lethal: s.Lethal,
		isos: fmt.Sprint(s.Isodoses), valid: true}
	if r.fields == nil {
		r.fields = map[regionID]*regionField{}
	}
	old := r.key
	if old.plane != p {
		r.fields = map[regionID]*regionField{}
	}
	n := p.Len()
	if old.plane != p || old.anat != s.Anatomy || !old.valid {
		r.anat = grow(r.anat, n)
		if s.Anatomy != nil {
			SampleInto(r.anat, s.Anatomy, p)
		}
	}
	doseChanged := old.plane != p || old.dose != s.Dose || !old.valid
	if doseChanged {
		r.doseRaw = grow(r.doseRaw, n)
		if s.Dose != nil {
			SampleInto(r.doseRaw, s.Dose, p)
		}
	}
	if doseChanged || old.scale != sc {
		r.dose = grow(r.dose, n)
		for m, d := range r.doseRaw[:n] {
			t := sc.T(float64(d))
			if t < 0 {
				r.dose[m] = float32(math.NaN())
			} else {
				r.dose[m] = float32(t)
			}
		}
	}
	if doseChanged || old.lethal != s.Lethal || old.isos != k.isos {
		r.lethal, r.isos = nil, nil
		if s.Dose != nil {
			if s.Lethal > 0 {
				r.lethal = MarchingSquares(r.doseRaw[:n], p.Width, p.Height, s.Lethal)
			}
			for _, l := range s.Isodoses {
				r.isos = append(r.isos, MarchingSquares(r.doseRaw[:n], p.Width, p.Height, l))
			}
		}
	}
	r.key = k
}

// field returns the cached evaluation of region g on the current plane.
func (r *Renderer) field(p Plane, g Region) *regionField {
	if g.IsZero() {
		return nil
	}
	id := regionID{g.Mask, g.Structure}
	if g.Mask != nil {
		id.st = nil
	}
	if f, ok := r.fields[id]; ok {
		return f
	}
	f := newRegionField(p, g, nil)
	r.fields[id] = f
	return f
}

func grow(b []float32, n int) []float32 {
	if cap(b) < n {
		return make([]float32, n)
	}
	return b[:n]
}

// Render composites s as seen through v into dst (allocated when nil or of
// the wrong size) and returns it.
//
// Layers, bottom to top: anatomy in grey through the window; the dose
// colourwash (log scale, transparent below the floor); not-monitored
// cross-hatch; spill fill; hole hatching; isodoses; margin (dashed), target
// (solid) and avoid (dotted) outlines; the lethal isoline (thick, white);
// hole and spill outlines; the marker; orientation letters, scale bar and
// caption. Every line has a dark halo so it reads on bright and dark
// anatomy alike. Only the visible display pixels are computed.
func (r *Renderer) Render(s *Scene, v View, dst *image.RGBA) (*image.RGBA, error) {
	p := s.Plane
	if err := p.Validate(); err != nil {
		return nil, fmt.Errorf("rendering plane: %w", err)
	}
	if !v.valid() {
		return nil, fmt.Errorf("rendering view %d×%d at zoom %g: not a drawable view", v.Width, v.Height, v.Zoom)
	}
	sc := s.Scale
	if sc == (DoseScale{}) {
		sc = DefaultDoseScale()
	}
	if err := sc.Validate(); err != nil {
		return nil, err
	}
	if dst == nil || dst.Rect != image.Rect(0, 0, v.Width, v.Height) {
		dst = image.NewRGBA(image.Rect(0, 0, v.Width, v.Height))
	}
	if r.fields == nil {
		r.fields = map[regionID]*regionField{}
	}
	r.prepare(s, sc)
	win := s.Window
	if win.Width == 0 && s.Anatomy != nil {
		win = AutoWindow(s.Anatomy)
	}
	st := r.Style
	r.base(dst, s, v, win, sc)

	// Region fills.
	notMon := r.field(p, s.NotMonitored)
	spill := r.field(p, s.Spill)
	holes := r.field(p, s.Holes)
	r.fill(dst, p, v, notMon, func(x, y int) (float64, bool) {
		m := (x - y) & 7
		n := (x + y) & 7
		if m == 0 || n == 0 {
			return 0.85, true
		}
		return 0.18, true
	}, review.ColorNotMonitored)
	r.fill(dst, p, v, spill, func(x, y int) (float64, bool) { return st.FillOpacity, true }, review.ColorSpill)
	r.fill(dst, p, v, holes, func(x, y int) (float64, bool) {
		if (x+y)%6 < 2 {
			return 0.9, true
		}
		return 0.22, true
	}, review.ColorHole)

	cv := newCanvas(dst, r.scratch)
	r.scratch = cv.cov
	// Isodoses in their wash colour.
	for n, lines := range r.isos {
		c := Colormap(sc.T(s.Isodoses[n]))
		for _, l := range lines {
			cv.stroke(r.display(p, v, l.Pixels), l.Closed, st.Isodose, Solid, c)
		}
	}
	r.outline(cv, p, v, s.Margin, st.Margin, Dashed, review.ColorMargin)
	r.outline(cv, p, v, s.Target, st.Target, Solid, review.ColorTarget)
	for _, a := range s.Avoid {
		r.outline(cv, p, v, a, st.Avoid, Dotted, review.ColorAvoid)
	}
	for _, l := range r.lethal {
		cv.stroke(r.display(p, v, l.Pixels), l.Closed, st.Lethal, Solid, review.ColorLethal)
	}
	r.outline(cv, p, v, s.Holes, st.Outline, Solid, review.ColorHole)
	r.outline(cv, p, v, s.Spill, st.Outline, Solid, review.ColorSpill)
	r.outline(cv, p, v, s.NotMonitored, 1, Solid, review.ColorNotMonitored)

	if s.Marker != nil {
		x, y := p.Pixel(*s.Marker)
		dx, dy := v.ToDisplay(p, Point{x, y})
		drawCrosshair(cv, dx, dy)
	}
	if s.Annotations {
		annotate(dst, cv, p, v)
	}
	if s.Caption != "" {
		size := labelSize(v)
		y := 8
		for _, line := range strings.Split(s.Caption, "\n") {
			drawText(dst, line, size, 8, y, anchorTopLeft, color.RGBA{0xF2, 0xF2, 0xF2, 0xFF})
			_, h := textSize(line, size)
			y += h + 3
		}
	}
	return dst, nil
}

// display maps plane pixel points to display coordinates (a reused buffer).
func (r *Renderer) display(p Plane, v View, pts []Point) []Point {
	r.pts = r.pts[:0]
	for _, q := range pts {
		x, y := v.ToDisplay(p, q)
		r.pts = append(r.pts, Point{x, y})
	}
	return r.pts
}

func (r *Renderer) outline(cv *canvas, p Plane, v View, g Region, width float64, style LineStyle, col color.RGBA) {
	f := r.field(p, g)
	if f == nil {
		return
	}
	for _, l := range f.outlines {
		cv.stroke(r.display(p, v, l.Pixels), l.Closed, width, style, col)
	}
}

// base draws the anatomy and the dose colourwash for every display pixel.
func (r *Renderer) base(dst *image.RGBA, s *Scene, v View, win Window, sc DoseScale) {
	p := s.Plane
	w, h := p.Width, p.Height
	bg := r.Style.Background
	gs, gofs := win.affine()
	haveAnat := s.Anatomy != nil
	haveDose := s.Dose != nil && !s.HideWash
	alpha := int(sc.Opacity*255 + 0.5)
	sx := 1 / (v.Zoom * p.PixelU)
	q0 := v.ToPlane(p, 0.5, 0.5)
	xmax, ymax := float64(w)-0.5, float64(h)-0.5
	for j := 0; j < v.Height; j++ {
		y := q0.Y + float64(j)/(v.Zoom*p.PixelV)
		pix := dst.Pix[j*dst.Stride : j*dst.Stride+4*v.Width]
		if y < -0.5 || y > ymax {
			for i := 0; i < v.Width; i++ {
				pix[4*i], pix[4*i+1], pix[4*i+2], pix[4*i+3] = bg.R, bg.G, bg.B, 0xFF
			}
			continue
		}
		yc := math.Max(0, math.Min(float64(h-1), y))
		y0 := int(yc)
		if y0 > h-2 {
			y0 = max(h-2, 0)
		}
		fy := yc - float64(y0)
		y1 := y0 + 1
		if h == 1 {
			y1, fy = 0, 0
		}
		for i := 0; i < v.Width; i++ {
			x := q0.X + float64(i)*sx
			o := pix[4*i : 4*i+4 : 4*i+4]
			if x < -0.5 || x > xmax {
				o[0], o[1], o[2], o[3] = bg.R, bg.G, bg.B, 0xFF
				continue
			}
			xc := math.Max(0, math.Min(float64(w-1), x))
			x0 := int(xc)
			if x0 > w-2 {
				x0 = max(w-2, 0)
			}
			fx := xc - float64(x0)
			x1 := x0 + 1
			if w == 1 {
				x1, fx = 0, 0
			}
			a, b, c, d := y0*w+x0, y0*w+x1, y1*w+x0, y1*w+x1
			g := uint8(0)
			if haveAnat {
				an := r.anat
				val := (float64(an[a])*(1-fx)+float64(an[b])*fx)*(1-fy) + (float64(an[c])*(1-fx)+float64(an[d])*fx)*fy
				gv := val*gs + gofs
				switch {
				case !(gv > 0):
				case gv >= 255:
					g = 255
				default:
					g = uint8(gv + 0.5)
				}
			}
			o[0], o[1], o[2], o[3] = g, g, g, 0xFF
			if haveDose {
				ds := r.dose
				t := (float64(ds[a])*(1-fx)+float64(ds[b])*fx)*(1-fy) + (float64(ds[c])*(1-fx)+float64(ds[d])*fx)*fy
				if t == t {
					lc := washLUT[int(t*(lutSize-1)+0.5)]
					blend(o, color.RGBA{lc[0], lc[1], lc[2], 0xFF}, alpha)
				}
			}
		}
	}
}

// fill blends colour col over the display pixels whose plane position lies
// inside region f (field >= 0.5); pattern gives the opacity at each display
// pixel.
func (r *Renderer) fill(dst *image.RGBA, p Plane, v View, f *regionField, pattern func(x, y int) (float64, bool), col color.RGBA) {
	if f == nil || f.box.Empty() {
		return
	}
	// Display rectangle of the region's plane box.
	ax, ay := v.ToDisplay(p, Point{float64(f.box.Min.X) - 0.5, float64(f.box.Min.Y) - 0.5})
	bx, by := v.ToDisplay(p, Point{float64(f.box.Max.X) - 0.5, float64(f.box.Max.Y) - 0.5})
	rect := image.Rect(int(math.Floor(ax)), int(math.Floor(ay)), int(math.Ceil(bx)), int(math.Ceil(by))).Intersect(dst.Rect)
	w, h := p.Width, p.Height
	for j := rect.Min.Y; j < rect.Max.Y; j++ {
		for i := rect.Min.X; i < rect.Max.X; i++ {
			q := v.ToPlane(p, float64(i)+0.5, float64(j)+0.5)
			if !(bilinear(f.field, w, h, q.X, q.Y) >= 0.5) {
				continue
			}
			a, ok := pattern(i, j)
			if !ok {
				continue
			}
			blend(dst.Pix[dst.PixOffset(i, j):], col, int(a*255+0.5))
		}
	}
}

// bilinear interpolates a w×h field at continuous pixel coordinate (x, y)
// with half a pixel of edge extension; NaN farther out.
func bilinear(f []float32, w, h int, x, y float64) float64 {
	if x < -0.5 || y < -0.5 || x > float64(w)-0.5 || y > float64(h)-0.5 {
		return math.NaN()
	}
	xc := math.Max(0, math.Min(float64(w-1), x))
	yc := math.Max(0, math.Min(float64(h-1), y))
	x0, fx := splitf(xc, w)
	y0, fy := splitf(yc, h)
	x1, y1 := min(x0+1, w-1), min(y0+1, h-1)
	a := float64(f[y0*w+x0])*(1-fx) + float64(f[y0*w+x1])*fx
	b := float64(f[y1*w+x0])*(1-fx) + float64(f[y1*w+x1])*fx
	return a*(1-fy) + b*fy
}

// drawCrosshair draws a crosshair with an open centre at (x, y).
func drawCrosshair(cv *canvas, x, y float64) {
	const gap, arm = 5, 14
	segs := [][2]Point{
		{{x - gap - arm, y}, {x - gap, y}}, {{x + gap, y}, {x + gap + arm, y}},
		{{x, y - gap - arm}, {x, y - gap}}, {{x, y + gap}, {x, y + gap + arm}},
	}
	for _, s := range segs {
		cv.capsule(s[0].X, s[0].Y, s[1].X, s[1].Y, 2.25)
	}
	cv.flush(haloColor, 0.75)
	for _, s := range segs {
		cv.capsule(s[0].X, s[0].Y, s[1].X, s[1].Y, 0.9)
	}
	cv.flush(color.RGBA{0xFF, 0xFF, 0xFF, 0xFF}, 1)
}

// labelSize returns the letter size (pixels) for a display.
func labelSize(v View) float64 {
	return math.Round(math.Max(12, math.Min(20, float64(min(v.Width, v.Height))/30)))
}

// annotate draws orientation letters at the middle of each edge and a
// scale bar at the bottom right.
func annotate(dst *image.RGBA, cv *canvas, p Plane, v View) {
	size := labelSize(v)
	white := color.RGBA{0xFF, 0xFF, 0xFF, 0xFF}
	m := 6
	W, H := v.Width, v.Height
	drawText(dst, OrientationLabel(p.U, 1), size+2, W-m, H/2, anchorRight, white)
	drawText(dst, OrientationLabel(p.U.Scale(-1), 1), size+2, m, H/2, anchorLeft, white)
	drawText(dst, OrientationLabel(p.V, 1), size+2, W/2, H-m, anchorBottom, white)
	drawText(dst, OrientationLabel(p.V.Scale(-1), 1), size+2, W/2, m, anchorTop, white)

	// Scale bar: the 1-2-5 length nearest a fifth of the display width.
	mm := niceLength(float64(W) / 5 / v.Zoom)
	px := mm * v.Zoom
	x1 := float64(W) - 14
	x0 := x1 - px
	y := float64(H) - 14
	segs := [][2]Point{{{x0, y}, {x1, y}}, {{x0, y - 6}, {x0, y}}, {{x1, y - 6}, {x1, y}}}
	for _, s := range segs {
		cv.capsule(s[0].X, s[0].Y, s[1].X, s[1].Y, 2.5)
	}
	cv.flush(haloColor, 0.75)
	for _, s := range segs {
		cv.capsule(s[0].X, s[0].Y, s[1].X, s[1].Y, 1)
	}
	cv.flush(white, 1)
	drawText(dst, formatMM(mm), size, int((x0+x1)/2), int(y)-8, anchorBottom, white)
}

// niceLength returns the largest of 1, 2 or 5 times a power of ten not
// above mm (at least 0.1 mm).
func niceLength(mm float64) float64 {
	if !(mm > 0.1) {
		return 0.1
	}
	e := math.Pow(10, math.Floor(math.Log10(mm)))
	for _, f := range []float64{5, 2, 1} {
		if f*e <= mm {
			return f * e
		}
	}
	return e
}

func formatMM(mm float64) string {
	if mm >= 1 {
		return fmt.Sprintf("%.0f mm", mm)
	}
	return fmt.Sprintf("%.1f mm", mm)
}

package view

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"strings"

	"dosecover/dosemap"
)

// Scene is everything drawn on one plane. Every layer is optional: a nil
// volume or a zero Region is left out.
type Scene struct {
	Plane Plane // the plane shown; its pixels set the resolution of isolines and outlines

	Anatomy *dosemap.Volume // grey background
	Window  Window          // anatomy window; Width 0: AutoWindow(Anatomy)

	Dose   *dosemap.Volume // cumulative thermal dose, CEM43 minutes
	Scale  DoseScale       // colourwash; zero value: DefaultDoseScale()
	Lethal float64         // lethal dose level for the thick isoline; 0: none
	// LethalRegion, when set, is outlined as the lethal line instead of
	// the Lethal isoline of Dose: pass the analysis' own lethal mask so the
	// picture shows exactly the region its figures count.
	LethalRegion Region
	Isodoses     []float64 // further isodose levels: thin light grey lines, labelled
	HideWash     bool      // draw the isolines without the colourwash

	Target, Margin Region   // solid and dashed outlines
	Avoid          []Region // dotted outlines
	Holes          Region   // hatched: target not reaching the lethal dose
	Spill          Region   // filled: lethal dose outside the margin
	NotMonitored   Region   // cross-hatched: no valid thermometry

	Lines []LevelLine // further isolines of any volume (e.g. lethal probability)

	// Measured are the thermometry stacks whose traces (where the plane
	// meets them) are drawn in ColorPlane; see StackTrace.
	Measured []MeasuredStack

	Marker *dosemap.Vec3 // crosshair at a patient point; nil: none

	Caption     string // lines of text drawn at the top left
	Annotations bool   // orientation letters and scale bar
}

// LevelLine is an isoline of any volume drawn over the picture, for
// example the 50 % contour of the lethal-dose probability.
type LevelLine struct {
	Volume *dosemap.Volume
	Level  float64
	Color  color.RGBA
	Style  LineStyle
	Width  float64 // display pixels; 0: 1.5
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
		FillOpacity: 0.7, Background: color.RGBA{0x0a, 0x0a, 0x0c, 0xFF}}
}

// Renderer composites Scenes into images. It keeps what depends only on
// the plane (samples of every volume, isolines, outlines) between calls, so
// zooming and panning redo only the per-display-pixel work, and it reuses
// its buffers. The cache is keyed by the plane, the volume and structure
// pointers and the levels: after changing a volume's data in place, call
// Invalidate. A Renderer is not safe for concurrent use.
type Renderer struct {
	Style Style

	key      cacheKey
	anat     []float32
	dose     []float32 // log10 of the dose (NaN: no wash)
	doseRaw  []float32
	lethal   []Polyline
	isos     [][]Polyline
	fields   map[regionID]*regionField
	binary   map[*dosemap.Volume]*dosemap.Volume
	samples  map[*dosemap.Volume][]float32 // extra volumes on the plane
	levels   map[levelKey][]Polyline       // their isolines
	doseBox  image.Rectangle               // plane pixels with positive dose
	auto     Window                        // AutoWindow of autoFor
	autoFor  *dosemap.Volume
	cols     []column
	scratch  []uint8
	spans    []int32 // the canvas' row spans
	fillCols []fillColumn
	pts      []Point
}

type levelKey struct {
	vol   *dosemap.Volume
	level float64
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
	r.samples, r.levels = nil, nil
	r.autoFor = nil
	r.fields = map[regionID]*regionField{}
	r.binary = nil
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
	if old.plane != p || !old.valid {
		r.fields = map[regionID]*regionField{}
		r.samples = map[*dosemap.Volume][]float32{}
		r.levels = map[levelKey][]Polyline{}
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
	if doseChanged {
		// The wash interpolates log10 of the dose between plane pixels, so
		// the floor edge is smooth at any zoom; zero and negative doses
		// sit far below any floor.
		r.dose = grow(r.dose, n)
		r.doseBox = image.Rectangle{}
		if s.Dose != nil {
			r.doseBox = positiveBox(r.doseRaw[:n], p.Width, p.Height)
		}
		for m, d := range r.doseRaw[:n] {
			switch {
			case d != d:
				r.dose[m] = d
			case d <= 1e-9: // far below any useful floor; skips the logarithm
				r.dose[m] = -30
			default:
				r.dose[m] = float32(math.Log10(float64(d)))
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
	if g.Mask != nil {
		// Reduce label and NaN masks once, not on every plane.
		b, ok := r.binary[g.Mask]
		if !ok {
			if g.Mask.Check() == nil {
				b = binaryMask(g.Mask)
			} else {
				b = g.Mask
			}
			if r.binary == nil {
				r.binary = map[*dosemap.Volume]*dosemap.Volume{}
			}
			r.binary[g.Mask] = b
		}
		g.Mask = b
	}
	f := newRegionField(p, g)
	r.fields[id] = f
	return f
}

// positiveBox returns the bounding rectangle of the samples > 0 of a w×h
// field (empty when there are none).
func positiveBox(f []float32, w, h int) image.Rectangle {
	b := image.Rectangle{}
	for y := 0; y < h; y++ {
		row := f[y*w : y*w+w]
		lo, hi := -1, -1
		for x, v := range row {
			if v > 0 {
				if lo < 0 {
					lo = x
				}
				hi = x
			}
		}
		if lo >= 0 {
			b = b.Union(image.Rect(lo, y, hi+1, y+1))
		}
	}
	return b
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
// cross-hatch; spill fill; hole hatching; isodoses; traces of measured
// planes; margin (dashed), target
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
		if r.autoFor != s.Anatomy {
			r.auto, r.autoFor = AutoWindow(s.Anatomy), s.Anatomy
		}
		win = r.auto
	}
	st := r.Style
	r.base(dst, s, v, win, sc)

	// Region fills.
	notMon := r.field(p, s.NotMonitored)
	spill := r.field(p, s.Spill)
	holes := r.field(p, s.Holes)
	// Not monitored: darkened, then light grey cross-hatch, so it reads on
	// grey anatomy too.
	r.fillLayers(dst, p, v, notMon, fillLayer{func(x, y int) float64 { return 0.55 }, haloColor},
		fillLayer{crossHatch, ColorNotMonitored})
	r.fill(dst, p, v, spill, func(x, y int) float64 { return st.FillOpacity }, ColorSpill)
	r.fill(dst, p, v, holes, hatch, ColorHole)

	cv := newCanvas(dst, r.scratch)
	r.scratch = cv.cov
	r.spans = cv.setSpans(r.spans)
	// Isodoses: thin light lines, each labelled with its level where it
	// reaches furthest right on screen (labels drawn after all lines).
	type isoLabel struct {
		text string
		x, y int
	}
	var labels []isoLabel
	for n, lines := range r.isos {
		for _, l := range lines {
			d := r.display(p, v, l.Pixels)
			cv.stroke(d, l.Closed, st.Isodose, Solid, isodoseColor)
			best := -1
			for m, q := range d {
				if q.X >= 4 && q.Y >= 10 && q.X < float64(v.Width)-30 && q.Y < float64(v.Height)-10 &&
					(best < 0 || q.X > d[best].X) {
					best = m
				}
			}
			if best >= 0 && len(d) >= 8 {
				labels = append(labels, isoLabel{formatDose(s.Isodoses[n]), int(d[best].X), int(d[best].Y)})
			}
		}
	}
	for _, l := range labels {
		drawText(dst, l.text, math.Max(11, labelSize(v)-3), l.x, l.y, anchorCentre, isodoseColor)
	}
	if len(s.Measured) > 0 {
		r.drawTraces(dst, cv, p, v, s.Measured)
	}
	r.outline(cv, p, v, s.Margin, st.Margin, Dashed, ColorMargin)
	r.outline(cv, p, v, s.Target, st.Target, Solid, ColorTarget)
	for _, a := range s.Avoid {
		r.outline(cv, p, v, a, st.Avoid, Dotted, ColorAvoid)
	}
	for _, ll := range s.Lines {
		if ll.Volume == nil {
			continue
		}
		lines := r.levelLines(p, ll)
		w := ll.Width
		if w <= 0 {
			w = 1.5
		}
		for _, l := range lines {
			cv.stroke(r.display(p, v, l.Pixels), l.Closed, w, ll.Style, ll.Color)
		}
	}
	if !s.LethalRegion.IsZero() {
		r.outline(cv, p, v, s.LethalRegion, st.Lethal, Solid, ColorLethal)
	} else {
		for _, l := range r.lethal {
			cv.stroke(r.display(p, v, l.Pixels), l.Closed, st.Lethal, Solid, ColorLethal)
		}
	}
	r.outline(cv, p, v, s.Holes, st.Outline, Solid, ColorHole)
	r.outline(cv, p, v, s.Spill, st.Outline, Solid, ColorSpill)
	r.outline(cv, p, v, s.NotMonitored, 1, Solid, ColorNotMonitored)

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
		if s.Annotations {
			// Keep clear of the top orientation letter.
			for _, line := range strings.Split(s.Caption, "\n") {
				if w, _ := textSize(line, size); 8+w > v.Width/2-int(size) {
					_, lh := textSize("A", size+2)
					y += lh + 6
					break
				}
			}
		}
		for _, line := range strings.Split(s.Caption, "\n") {
			drawText(dst, line, size, 8, y, anchorTopLeft, color.RGBA{0xF2, 0xF2, 0xF2, 0xFF})
			_, h := textSize(line, size)
			y += h + 3
		}
	}
	return dst, nil
}

// levelLines returns the cached isolines of ll on plane p.
func (r *Renderer) levelLines(p Plane, ll LevelLine) []Polyline {
	k := levelKey{ll.Volume, ll.Level}
	lines, ok := r.levels[k]
	if !ok {
		vals, ok := r.samples[ll.Volume]
		if !ok {
			vals = Sample(ll.Volume, p)
			r.samples[ll.Volume] = vals
		}
		lines = MarchingSquares(vals, p.Width, p.Height, ll.Level)
		r.levels[k] = lines
	}
	return lines
}

// Prepare does ahead of time the per-plane work of rendering s (sampling
// anatomy, dose and further volumes on s.Plane, tracing isolines, region
// fields and outlines), so that a later Render of a scene on the same plane
// with the same volumes, regions and levels only composites. It fails like
// Render on an unusable plane or dose scale. Prepare may run on another
// goroutine than the one drawing, with a Renderer of its own.
func (r *Renderer) Prepare(s *Scene) error {
	p := s.Plane
	if err := p.Validate(); err != nil {
		return fmt.Errorf("preparing plane: %w", err)
	}
	sc := s.Scale
	if sc == (DoseScale{}) {
		sc = DefaultDoseScale()
	}
	if err := sc.Validate(); err != nil {
		return err
	}
	r.prepare(s, sc)
	for _, g := range []Region{s.NotMonitored, s.Spill, s.Holes, s.Margin, s.Target, s.LethalRegion} {
		r.field(p, g)
	}
	for _, a := range s.Avoid {
		r.field(p, a)
	}
	for _, ll := range s.Lines {
		if ll.Volume != nil {
			r.levelLines(p, ll)
		}
	}
	return nil
}

// Plane returns the plane whose work the Renderer holds (from the latest
// Render or Prepare) and whether it holds any.
func (r *Renderer) Plane() (Plane, bool) { return r.key.plane, r.key.valid }

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

// column is the horizontal interpolation of one display column: the two
// plane pixels and the weight of the right one; x0 < 0 outside the plane.
type column struct {
	x0, x1 int32
	fx     float32
	dose   bool // within the box of positive dose
}

// base draws the anatomy and the dose colourwash for every display pixel.
// The horizontal interpolation is the same on every display row, so it is
// tabulated once per column.
func (r *Renderer) base(dst *image.RGBA, s *Scene, v View, win Window, sc DoseScale) {
	p := s.Plane
	w, h := p.Width, p.Height
	bg := r.Style.Background
	gs, gofs := win.affine()
	g32, o32 := float32(gs), float32(gofs)
	haveAnat := s.Anatomy != nil
	haveDose := s.Dose != nil && !s.HideWash && !r.doseBox.Empty()
	alpha := int(sc.Opacity*255 + 0.5)
	lf := float32(math.Log10(sc.Floor))
	inv := float32(1 / (math.Log10(sc.Ceiling) - math.Log10(sc.Floor)))
	q0 := v.ToPlane(p, 0.5, 0.5)
	if cap(r.cols) < v.Width {
		r.cols = make([]column, v.Width)
	}
	cols := r.cols[:v.Width]
	for i := range cols {
		cols[i] = column{x0: -1}
		x := q0.X + float64(i)/(v.Zoom*p.PixelU)
		if x < -0.5 || x > float64(w)-0.5 {
			continue
		}
		x0, fx := splitf(math.Max(0, math.Min(float64(w-1), x)), w)
		cols[i] = column{x0: int32(x0), x1: int32(min(x0+1, w-1)), fx: float32(fx),
			dose: x0+1 >= r.doseBox.Min.X && x0 < r.doseBox.Max.X}
	}
	for j := 0; j < v.Height; j++ {
		y := q0.Y + float64(j)/(v.Zoom*p.PixelV)
		pix := dst.Pix[j*dst.Stride : j*dst.Stride+4*v.Width]
		if y < -0.5 || y > float64(h)-0.5 {
			for i := 0; i < v.Width; i++ {
				pix[4*i], pix[4*i+1], pix[4*i+2], pix[4*i+3] = bg.R, bg.G, bg.B, 0xFF
			}
			continue
		}
		y0, fy64 := splitf(math.Max(0, math.Min(float64(h-1), y)), h)
		y1 := min(y0+1, h-1)
		fy := float32(fy64)
		var a0, a1, d0, d1 []float32
		if haveAnat {
			a0, a1 = r.anat[y0*w:y0*w+w], r.anat[y1*w:y1*w+w]
		}
		rowDose := haveDose && y0+1 >= r.doseBox.Min.Y && y0 < r.doseBox.Max.Y
		if rowDose {
			d0, d1 = r.dose[y0*w:y0*w+w], r.dose[y1*w:y1*w+w]
		}
		for i, c := range cols {
			o := pix[4*i : 4*i+4 : 4*i+4]
			if c.x0 < 0 {
				o[0], o[1], o[2], o[3] = bg.R, bg.G, bg.B, 0xFF
				continue
			}
			g := uint8(0)
			if a0 != nil {
				t := a0[c.x0] + (a0[c.x1]-a0[c.x0])*c.fx
				b := a1[c.x0] + (a1[c.x1]-a1[c.x0])*c.fx
				gv := (t+(b-t)*fy)*g32 + o32
				switch {
				case !(gv > 0):
				case gv >= 255:
					g = 255
				default:
					g = uint8(gv + 0.5)
				}
			}
			o[0], o[1], o[2], o[3] = g, g, g, 0xFF
			if rowDose && c.dose {
				t := d0[c.x0] + (d0[c.x1]-d0[c.x0])*c.fx
				b := d1[c.x0] + (d1[c.x1]-d1[c.x0])*c.fx
				if u := (t + (b-t)*fy - lf) * inv; u >= 0 { // false for NaN
					u = min(u, 1)
					lc := washLUT[int(u*(lutSize-1)+0.5)]
					blend(o, color.RGBA{lc[0], lc[1], lc[2], 0xFF}, alpha)
				}
			}
		}
	}
}

// fill blends colour col over the display pixels whose plane position lies
// inside region f (field >= 0.5); pattern gives the opacity at each display
// pixel.
func (r *Renderer) fill(dst *image.RGBA, p Plane, v View, f *regionField, pattern func(x, y int) float64, col color.RGBA) {
	r.fillLayers(dst, p, v, f, fillLayer{pattern, col})
}

// fillLayer is one pattern and colour blended over a region.
type fillLayer struct {
	pattern func(x, y int) float64
	col     color.RGBA
}

// fillLayers blends each layer in turn over the display pixels inside
// region f, in one pass over the region. The field is interpolated as
// regionField.at does, with the horizontal part tabulated per display
// column.
func (r *Renderer) fillLayers(dst *image.RGBA, p Plane, v View, f *regionField, layers ...fillLayer) {
	if f == nil || f.box.Empty() {
		return
	}
	// Display rectangle of the region's plane box.
	ax, ay := v.ToDisplay(p, Point{float64(f.box.Min.X) - 0.5, float64(f.box.Min.Y) - 0.5})
	bx, by := v.ToDisplay(p, Point{float64(f.box.Max.X) - 0.5, float64(f.box.Max.Y) - 0.5})
	rect := image.Rect(int(math.Floor(ax)), int(math.Floor(ay)), int(math.Ceil(bx)), int(math.Ceil(by))).Intersect(dst.Rect)
	if rect.Empty() {
		return
	}
	w, h := f.box.Dx(), f.box.Dy()
	if cap(r.fillCols) < rect.Dx() {
		r.fillCols = make([]fillColumn, rect.Dx())
	}
	cols := r.fillCols[:rect.Dx()]
	for n := range cols {
		x := v.ToPlane(p, float64(rect.Min.X+n)+0.5, 0).X - float64(f.box.Min.X)
		if x < -0.5 || x > float64(w)-0.5 {
			cols[n] = fillColumn{x0: -1}
			continue
		}
		x0, fx := splitf(math.Max(0, math.Min(float64(w-1), x)), w)
		cols[n] = fillColumn{x0: int32(x0), x1: int32(min(x0+1, w-1)), fx: fx}
	}
	for j := rect.Min.Y; j < rect.Max.Y; j++ {
		y := v.ToPlane(p, 0, float64(j)+0.5).Y - float64(f.box.Min.Y)
		if y < -0.5 || y > float64(h)-0.5 {
			continue
		}
		y0, fy := splitf(math.Max(0, math.Min(float64(h-1), y)), h)
		y1 := min(y0+1, h-1)
		r0, r1 := f.field[y0*w:y0*w+w], f.field[y1*w:y1*w+w]
		for n, c := range cols {
			if c.x0 < 0 {
				continue
			}
			a := float64(r0[c.x0])*(1-c.fx) + float64(r0[c.x1])*c.fx
			b := float64(r1[c.x0])*(1-c.fx) + float64(r1[c.x1])*c.fx
			if !(a*(1-fy)+b*fy >= 0.5) { // false for NaN too
				continue
			}
			i := rect.Min.X + n
			o := dst.Pix[dst.PixOffset(i, j):]
			for _, l := range layers {
				blend(o, l.col, int(l.pattern(i, j)*255+0.5))
			}
		}
	}
}

// fillColumn is the horizontal interpolation of a region field for one
// display column; x0 < 0 outside the field.
type fillColumn struct {
	x0, x1 int32
	fx     float64
}

// hatch is the hole pattern: diagonal stripes (rising to the right) of 2
// pixels every 6 over a light tint; opacity at display pixel (x, y).
func hatch(x, y int) float64 {
	if (x+y)%6 < 2 {
		return 0.9
	}
	return 0.22
}

// crossHatch is the not-monitored pattern: one-pixel lines along both
// diagonals every 8 pixels over a faint tint.
func crossHatch(x, y int) float64 {
	if (x-y)&7 == 0 || (x+y)&7 == 0 {
		return 0.95
	}
	return 0
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

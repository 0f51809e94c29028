package report

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"time"

	"codeberg.org/go-pdf/fpdf"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/vg"
)

// pdfCanvas is a vg.Canvas drawing onto one fpdf page. It follows gonum's
// vgpdf (BSD-3-Clause) for paths, transforms and images, but embeds each
// font as a UTF-8 TrueType subset under its own family name: vgpdf embeds
// every font from one shared file name, so a second typeface on a page
// shows the first one's glyphs with its own widths, and its text is limited
// to Windows-1252.
type pdfCanvas struct {
	doc    *fpdf.Fpdf
	w, h   vg.Length
	stack  []float64 // line widths of the pushed states
	fonts  map[string]bool
	images int
	err    error
}

const pdfDPI = 72

func newPDFCanvas(w, h vg.Length) *pdfCanvas {
	doc := fpdf.NewCustom(&fpdf.InitType{UnitStr: "pt", Size: fpdf.SizeType{Wd: w.Points(), Ht: h.Points()}})
	doc.SetMargins(0, 0, 0)
	doc.SetAutoPageBreak(false, 0)
	doc.AddPage()
	c := &pdfCanvas{doc: doc, w: w, h: h, stack: []float64{1}, fonts: map[string]bool{}}
	c.Push()
	c.Translate(vg.Point{X: 0, Y: h})
	c.Scale(1, -1)
	vg.Initialize(c)
	return c
}

func (c *pdfCanvas) unit(l vg.Length) float64 { return l.Dots(pdfDPI) }

// newPage ends the current page and starts another one of the same size
// with the same top-down transform.
func (c *pdfCanvas) newPage() {
	c.Pop()
	c.doc.AddPage()
	c.stack = []float64{1}
	c.Push()
	c.Translate(vg.Point{X: 0, Y: c.h})
	c.Scale(1, -1)
}

// Size returns the page size.
func (c *pdfCanvas) Size() (w, h vg.Length) { return c.w, c.h }

// SetLineWidth sets the stroke width.
func (c *pdfCanvas) SetLineWidth(w vg.Length) {
	c.stack[len(c.stack)-1] = float64(w)
	c.doc.SetLineWidth(c.unit(w))
}

// SetLineDash sets the dash pattern of strokes.
func (c *pdfCanvas) SetLineDash(dashes []vg.Length, offs vg.Length) {
	ds := make([]float64, len(dashes))
	for i, d := range dashes {
		ds[i] = c.unit(d)
	}
	c.doc.SetDashPattern(ds, c.unit(offs))
}

// SetColor sets stroke, fill and text colour.
func (c *pdfCanvas) SetColor(clr color.Color) {
	if clr == nil {
		clr = color.Black
	}
	r, g, b, a := clr.RGBA()
	ri, gi, bi := int(r>>8), int(g>>8), int(b>>8)
	if a > 0 && a < 0xFFFF { // un-premultiply
		ri, gi, bi = int(r*0xFF/a), int(g*0xFF/a), int(b*0xFF/a)
	}
	c.doc.SetFillColor(ri, gi, bi)
	c.doc.SetDrawColor(ri, gi, bi)
	c.doc.SetTextColor(ri, gi, bi)
	c.doc.SetAlpha(float64(a)/math.MaxUint16, "Normal")
}

// Rotate rotates the user space by r radians.
func (c *pdfCanvas) Rotate(r float64) { c.doc.TransformRotate(-r*180/math.Pi, 0, 0) }

// Translate moves the origin.
func (c *pdfCanvas) Translate(pt vg.Point) { c.doc.TransformTranslate(c.unit(pt.X), c.unit(pt.Y)) }

// Scale scales the user space.
func (c *pdfCanvas) Scale(x, y float64) { c.doc.TransformScale(x*100, y*100, 0, 0) }

// Push saves the graphics state.
func (c *pdfCanvas) Push() {
	c.stack = append(c.stack, c.stack[len(c.stack)-1])
	c.doc.TransformBegin()
}

// Pop restores the graphics state.
func (c *pdfCanvas) Pop() {
	c.doc.TransformEnd()
	c.stack = c.stack[:len(c.stack)-1]
}

// Stroke strokes p.
func (c *pdfCanvas) Stroke(p vg.Path) {
	if c.stack[len(c.stack)-1] > 0 {
		c.path(p, "D")
	}
}

// Fill fills p.
func (c *pdfCanvas) Fill(p vg.Path) { c.path(p, "F") }

func (c *pdfCanvas) path(p vg.Path, style string) {
	var x0, y0 float64
	for _, comp := range p {
		switch comp.Type {
		case vg.MoveComp:
			x0, y0 = c.unit(comp.Pos.X), c.unit(comp.Pos.Y)
			c.doc.MoveTo(x0, y0)
		case vg.LineComp:
			c.doc.LineTo(c.unit(comp.Pos.X), c.unit(comp.Pos.Y))
		case vg.ArcComp:
			xs := comp.Pos.X + comp.Radius*vg.Length(math.Cos(comp.Start))
			ys := comp.Pos.Y + comp.Radius*vg.Length(math.Sin(comp.Start))
			c.doc.LineTo(c.unit(xs), c.unit(ys))
			r := c.unit(comp.Radius)
			const deg = 180 / math.Pi
			beg := comp.Start * deg
			c.doc.Arc(c.unit(comp.Pos.X), c.unit(comp.Pos.Y), r, r, comp.Angle*deg, beg, beg+comp.Angle*deg, style)
			xe := comp.Pos.X + comp.Radius*vg.Length(math.Cos(comp.Start+comp.Angle))
			ye := comp.Pos.Y + comp.Radius*vg.Length(math.Sin(comp.Start+comp.Angle))
			c.doc.MoveTo(c.unit(xe), c.unit(ye))
		case vg.CurveComp:
			px, py := c.unit(comp.Pos.X), c.unit(comp.Pos.Y)
			switch len(comp.Control) {
			case 1:
				c.doc.CurveTo(c.unit(comp.Control[0].X), c.unit(comp.Control[0].Y), px, py)
			case 2:
				c.doc.CurveBezierCubicTo(c.unit(comp.Control[0].X), c.unit(comp.Control[0].Y),
					c.unit(comp.Control[1].X), c.unit(comp.Control[1].Y), px, py)
			}
		case vg.CloseComp:
			c.doc.LineTo(x0, y0)
			c.doc.ClosePath()
		}
	}
	c.doc.DrawPath(style)
}

// register embeds the TrueType font of f once, under its full name.
func (c *pdfCanvas) register(f font.Face) string {
	name := f.Name()
	if c.fonts[name] {
		return name
	}
	var buf bytes.Buffer
	if _, err := f.Face.WriteSourceTo(nil, &buf); err != nil && c.err == nil {
		c.err = fmt.Errorf("embedding font %s: %w", name, err)
	}
	c.doc.AddUTF8FontFromBytes(name, "", buf.Bytes())
	c.fonts[name] = true
	return name
}

// FillString draws s with its baseline starting at pt.
func (c *pdfCanvas) FillString(f font.Face, pt vg.Point, s string) {
	if f.Font.Size == 0 {
		return
	}
	name := c.register(f)
	size := c.unit(f.Font.Size)
	c.doc.SetFont(name, "", size)
	c.Push()
	defer c.Pop()
	c.Translate(pt)
	c.Scale(1, -1) // fpdf's text origin is the top left corner
	e := f.Extents()
	top := -float64(e.Ascent/(e.Ascent+e.Descent)) * size
	c.doc.MoveTo(-c.doc.GetCellMargin(), top)
	c.doc.CellFormat(c.doc.GetStringWidth(s), size, s, "", 0, "BL", false, 0, "")
}

// DrawImage draws img into rect, embedded as PNG.
func (c *pdfCanvas) DrawImage(rect vg.Rectangle, img image.Image) {
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		if c.err == nil {
			c.err = fmt.Errorf("encoding image: %w", err)
		}
		return
	}
	opt := fpdf.ImageOptions{ImageType: "png"}
	c.images++
	name := fmt.Sprintf("image%03d", c.images)
	c.doc.RegisterImageOptionsReader(name, opt, &buf)
	// fpdf places images in its own top-down page space; the user space here
	// points up, so flip it about the rectangle's top edge first.
	sz := rect.Size()
	c.Push()
	c.Translate(vg.Point{X: rect.Min.X, Y: rect.Max.Y})
	c.Scale(1, -1)
	c.doc.ImageOptions(name, 0, 0, c.unit(sz.X), c.unit(sz.Y), false, opt, 0, "")
	c.Pop()
}

// writeTo closes the page and writes the document.
func (c *pdfCanvas) writeTo(w io.Writer, title string, created time.Time) error {
	c.Pop()
	c.doc.SetTitle(title, true)
	c.doc.SetCreator("dosecover", true)
	c.doc.SetProducer("dosecover (fpdf)", true)
	if !created.IsZero() {
		c.doc.SetCreationDate(created)
		c.doc.SetModificationDate(created)
	}
	if c.err != nil {
		return c.err
	}
	return c.doc.Output(w)
}

package report

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"strings"

	stdfnt "golang.org/x/image/font"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"dosecover/review/view"
)

// PageWidth and PageHeight are the size of the report page, A4 portrait
// (ISO 216: 210 mm × 297 mm).
const (
	PageWidth  = 210 * vg.Millimeter
	PageHeight = 297 * vg.Millimeter
)

// Layout constants of the page, in points.
const (
	margin    = 12 * vg.Millimeter
	gap       = 8
	bodySize  = 8
	smallSize = 7
	headSize  = 9.5
	titleSize = 15
)

var (
	colInk    = color.Gray{0x10}
	colFaint  = color.Gray{0x60}
	colRule   = color.Gray{0xB0}
	colShade  = color.Gray{0xEE}
	colPanel  = color.Gray{0x30}
	colAccent = view.ColorSpill
)

// pen draws text and boxes in top-down page coordinates: y is the distance
// from the top edge of the page, x from the left edge.
type pen struct {
	c vg.Canvas
	h vg.Length
}

// boldVariant names Liberation Sans Bold as a variant of its own with normal
// weight, so that every face has its own name whatever canvas draws it.
const boldVariant = "SansBold"

func init() {
	b := font.DefaultCache.Lookup(font.Font{Typeface: "Liberation", Variant: "Sans", Weight: stdfnt.WeightBold}, 10)
	font.DefaultCache.Add(font.Collection{{Font: font.Font{Typeface: "Liberation", Variant: boldVariant}, Face: b.Face}})
}

func sans(size vg.Length, bold bool) font.Face {
	f := font.Font{Typeface: "Liberation", Variant: "Sans", Size: size}
	if bold {
		f.Variant = boldVariant
	}
	return font.DefaultCache.Lookup(f, size)
}

func mono(size vg.Length) font.Face {
	f := font.Font{Typeface: "Liberation", Variant: "Mono", Size: size}
	return font.DefaultCache.Lookup(f, size)
}

// pt converts top-down coordinates to the canvas' bottom-up ones.
func (p pen) pt(x, y vg.Length) vg.Point { return vg.Point{X: x, Y: p.h - y} }

// text draws s with its top at y and returns the y below the line.
func (p pen) text(x, y vg.Length, f font.Face, clr color.Color, s string) vg.Length {
	e := f.Extents()
	p.c.SetColor(clr)
	p.c.FillString(f, p.pt(x, y+e.Ascent), s)
	return y + e.Height
}

// textRight draws s right-aligned at x.
func (p pen) textRight(x, y vg.Length, f font.Face, clr color.Color, s string) vg.Length {
	return p.text(x-f.Width(s), y, f, clr, s)
}

// wrap breaks s into lines no wider than w.
func wrap(f font.Face, s string, w vg.Length) []string {
	var lines []string
	for _, para := range strings.Split(s, "\n") {
		words := strings.Fields(para)
		line := ""
		for _, wd := range words {
			try := wd
			if line != "" {
				try = line + " " + wd
			}
			if line != "" && f.Width(try) > w {
				lines = append(lines, line)
				line = wd
				continue
			}
			line = try
		}
		lines = append(lines, line)
	}
	return lines
}

// para draws s wrapped to width w and returns the y below it.
func (p pen) para(x, y, w vg.Length, f font.Face, clr color.Color, s string) vg.Length {
	for _, l := range wrap(f, s, w) {
		y = p.text(x, y, f, clr, l)
	}
	return y
}

// rect fills the rectangle with top-left corner (x, y).
func (p pen) rect(x, y, w, h vg.Length, clr color.Color) {
	p.c.SetColor(clr)
	p.c.Fill(p.box(x, y, w, h))
}

func (p pen) box(x, y, w, h vg.Length) vg.Path {
	var path vg.Path
	path.Move(p.pt(x, y))
	path.Line(p.pt(x+w, y))
	path.Line(p.pt(x+w, y+h))
	path.Line(p.pt(x, y+h))
	path.Close()
	return path
}

// line strokes a straight segment.
func (p pen) line(x0, y0, x1, y1, lw vg.Length, clr color.Color, dash []vg.Length) {
	p.c.SetColor(clr)
	p.c.SetLineWidth(lw)
	p.c.SetLineDash(dash, 0)
	var path vg.Path
	path.Move(p.pt(x0, y0))
	path.Line(p.pt(x1, y1))
	p.c.Stroke(path)
	p.c.SetLineDash(nil, 0)
}

// clip shortens s with an ellipsis until it fits in w.
func clip(f font.Face, s string, w vg.Length) string {
	if f.Width(s) <= w {
		return s
	}
	r := []rune(s)
	for len(r) > 0 && f.Width(string(r)+"…") > w {
		r = r[:len(r)-1]
	}
	return string(r) + "…"
}

// heading draws a section heading with a rule and returns the y below it.
func (p pen) heading(x, y, w vg.Length, s string) vg.Length {
	f := sans(headSize, true)
	y = p.text(x, y, f, colInk, s)
	p.line(x, y+0.5, x+w, y+0.5, 0.6, colRule, nil)
	return y + 3
}

// Render draws the first report page of in onto c, which must be
// PageWidth × PageHeight. It is the single layout used by RenderPNG and
// RenderPDF; see RenderPage for the pages after it.
func Render(c vg.Canvas, in *Input) error { return RenderPage(c, in, 1) }

// Pages returns the number of pages of the report of in: one, unless the
// sonication table does not fit on it; it then continues on further pages
// (every sonication is listed).
func Pages(in *Input) int {
	if in == nil {
		return 1
	}
	return len(pageStarts(in))
}

// pageStarts returns the first sonication row of every page.
func pageStarts(in *Input) []int {
	dry := pen{c: nopCanvas{}, h: PageHeight}
	starts := []int{0}
	next := drawFirstPage(dry, in, 0)
	for next < len(in.Sonications) && len(starts) < 1000 {
		starts = append(starts, next)
		next = drawLaterPage(dry, in, next, len(starts), 0)
	}
	return starts
}

// RenderPage draws page n (1-based, up to Pages) of the report of in onto
// c, which must be PageWidth × PageHeight.
func RenderPage(c vg.Canvas, in *Input, n int) error {
	if in == nil {
		return fmt.Errorf("report: no input")
	}
	starts := pageStarts(in)
	if n < 1 || n > len(starts) {
		return fmt.Errorf("report: page %d of %d", n, len(starts))
	}
	p := pen{c: c, h: PageHeight}
	if n == 1 {
		drawFirstPage(p, in, len(starts))
		return nil
	}
	drawLaterPage(p, in, starts[n-1], n, len(starts))
	return nil
}

// drawFirstPage draws the first page for a report of pages pages (0 while
// counting them) and returns the first sonication row it did not show.
func drawFirstPage(p pen, in *Input, pages int) int {
	p.rect(0, 0, PageWidth, PageHeight, color.White)
	x0 := margin
	w := PageWidth - 2*margin
	y := margin

	y = drawHeader(p, in, x0, y, w)
	y += gap
	y = drawFacts(p, in, x0, y, w)
	y += gap
	y = drawPanels(p, in, x0, y, w)
	y += gap
	y = drawPlots(p, in, x0, y, w)
	y += gap
	// The tables take the room left above the methods and the cautions,
	// which are measured first on a canvas that draws nothing.
	dry := pen{c: nopCanvas{}, h: PageHeight}
	methodsH := drawMethods(dry, in, x0, 0, w)
	footTop := PageHeight - margin - footHeight(in, w)
	y, next := drawTables(p, in, x0, y, w, footTop-gap-methodsH-gap, pages)
	y += gap
	y = drawMethods(p, in, x0, y, w)
	drawFoot(p, in, x0, y+gap, w, 1, pages)
	return next
}

// drawLaterPage draws page page of pages: the header, the sonication
// table from row from on, and the cautions. It returns the first row it
// did not show.
func drawLaterPage(p pen, in *Input, from, page, pages int) int {
	p.rect(0, 0, PageWidth, PageHeight, color.White)
	x0 := margin
	w := PageWidth - 2*margin
	y := drawHeader(p, in, x0, margin, w) + gap
	footTop := PageHeight - margin - footHeight(in, w)
	y, next := drawSonications(p, in, x0, y, w, footTop-gap, from, page, pages)
	drawFoot(p, in, x0, y+gap, w, page, pages)
	return next
}

// nopCanvas is a vg.Canvas that draws nothing, for measuring a block.
type nopCanvas struct{}

func (nopCanvas) SetLineWidth(vg.Length)                 {}
func (nopCanvas) SetLineDash([]vg.Length, vg.Length)     {}
func (nopCanvas) SetColor(color.Color)                   {}
func (nopCanvas) Rotate(float64)                         {}
func (nopCanvas) Translate(vg.Point)                     {}
func (nopCanvas) Scale(float64, float64)                 {}
func (nopCanvas) Push()                                  {}
func (nopCanvas) Pop()                                   {}
func (nopCanvas) Stroke(vg.Path)                         {}
func (nopCanvas) Fill(vg.Path)                           {}
func (nopCanvas) FillString(font.Face, vg.Point, string) {}
func (nopCanvas) DrawImage(vg.Rectangle, image.Image)    {}

func drawHeader(p pen, in *Input, x, y, w vg.Length) vg.Length {
	title := in.Title
	if title == "" {
		title = "Thermal dose coverage review"
	}
	ft := sans(titleSize, true)
	p.text(x, y, ft, colInk, title)
	label := in.CaseLabel
	if label == "" {
		label = "unnamed case"
	}
	fl := sans(headSize+1, true)
	p.textRight(x+w, y+2, fl, colInk, label)
	y += ft.Extents().Height + 2

	fb := sans(bodySize, false)
	var parts []string
	scan := in.ScanDate
	if scan == "" {
		scan = "not given"
		if in.Deidentified {
			scan = "hidden (de-identified)"
		}
	}
	parts = append(parts, "Scan date: "+scan)
	rd := "not given"
	if !in.ReviewDate.IsZero() {
		rd = in.ReviewDate.UTC().Format("2006-01-02 15:04 UTC")
	}
	parts = append(parts, "Review date: "+rd)
	rv := in.Reviewer
	if rv == "" {
		rv = "not given"
	}
	parts = append(parts, "Reviewer: "+rv)
	so := in.SignOff
	if so == "" {
		so = "not signed off"
	}
	y = p.text(x, y, fb, colInk, strings.Join(parts, "    "))
	y = p.para(x, y, w, fb, colInk, "Sign-off: "+so)
	if in.SignOffComment != "" {
		y = p.para(x, y, w, fb, colInk, "Sign-off comment: "+in.SignOffComment)
	}
	var left []string
	for _, s := range in.Sonications {
		if s.Excluded {
			left = append(left, fmt.Sprint(s.Number))
		}
	}
	if len(left) > 0 {
		what := "sonication " + left[0]
		if len(left) > 1 {
			what = "sonications " + strings.Join(left, ", ")
		}
		y = p.para(x, y, w, sans(bodySize, true), colInk, "Left out of the cumulative dose by the reviewer: "+what)
	}
	y += 2
	// Short caution strip under the header; the full text is at the foot.
	fs := sans(smallSize, true)
	h := fs.Extents().Height + 3
	p.rect(x, y, w, h, colShade)
	p.rect(x, y, 2, h, colAccent)
	p.text(x+6, y+1.5, fs, colInk, "For retrospective review, QA and teaching - not a planning or treatment system. Thresholds vary by tissue; defer to local protocols.")
	return y + h
}

// pct formats a fraction as a percentage.
func pct(f float64) string {
	if math.IsNaN(f) {
		return "n/a"
	}
	return fmt.Sprintf("%.1f %%", 100*f)
}

// coveredPct formats the covered part of the monitored target: "not
// measurable" when no part of the target is monitored (NaN).
func coveredPct(f float64) string {
	if math.IsNaN(f) {
		return "not measurable"
	}
	return pct(f)
}

// num formats x with the given number of decimals, "n/a" for NaN.
func num(x float64, dec int) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "n/a"
	}
	return fmt.Sprintf("%.*f", dec, x)
}

// dose formats a dose value compactly (dose spans many decades).
func dose(x float64) string {
	switch {
	case math.IsNaN(x):
		return "n/a"
	case math.IsInf(x, 1):
		return "inf"
	case x >= 1e5:
		return fmt.Sprintf("%.2g", x)
	case x >= 100:
		return fmt.Sprintf("%.0f", x)
	case x >= 1:
		return fmt.Sprintf("%.1f", x)
	}
	return fmt.Sprintf("%.2g", x)
}

// factLines returns the facts block as (label, value) pairs in two columns.
func factLines(in *Input) (left, right [][2]string) {
	f := in.Facts
	unit := doseUnit(in)
	target := f.TargetName
	if target == "" {
		target = "target"
	}
	band := "not computed"
	if !math.IsNaN(f.CoveredLow) && !math.IsNaN(f.CoveredHigh) {
		band = pct(f.CoveredLow) + " to " + pct(f.CoveredHigh) + " of the monitored part"
		if f.BandLabel != "" {
			band += " (" + f.BandLabel + ")"
		}
	}
	covered := pct(f.Covered) + " of the monitored part; "
	if math.IsNaN(f.Covered) {
		covered = "not measurable (no part of it monitored); "
	}
	left = append(left,
		[2]string{"Covered (" + target + ")", covered + pct(f.CoveredOfTarget) + " of the whole target of " + num(f.TargetVolumeML, 2) + " mL"},
		[2]string{"Uncertainty band", band},
		[2]string{"Not monitored", pct(f.NotMonitored) + " of the target (no valid thermometry)"},
		[2]string{"D98 / D50 / D2", dose(f.D98) + " / " + dose(f.D50) + " / " + dose(f.D2) + " " + unit},
		[2]string{"Threshold, margin", dose(f.Threshold) + " " + unit + ", " + num(f.MarginMM, 1) + " mm"},
	)
	if a := f.AsMeasured; a != nil {
		left = append(left,
			[2]string{"Residual heat", "corrected: earlier sonications' estimated heat added (carry-over on)"},
			[2]string{"As measured", coveredPct(a.Covered) + " covered (monitored), " + pct(a.CoveredOfTarget) + " of whole target; " + num(a.OutsideMarginML, 3) + " mL beyond margin"})
	}
	holes := "none"
	if math.IsNaN(f.Covered) {
		holes = "not measurable (no part of the target monitored)"
	}
	if len(f.Holes) > 0 {
		var tot float64
		for _, h := range f.Holes {
			tot += h.VolumeML
		}
		holes = fmt.Sprintf("%d, total %s mL; largest %s mL", len(f.Holes), num(tot, 3), num(f.Holes[0].VolumeML, 3))
		if !math.IsNaN(f.Holes[0].DepthMM) {
			holes += fmt.Sprintf(", %s mm deep", num(f.Holes[0].DepthMM, 1))
		}
	}
	out := num(f.OutsideMarginML, 3) + " mL"
	if len(f.Outside) > 0 {
		out += fmt.Sprintf(" in %d cluster(s); largest %s mL", len(f.Outside), num(f.Outside[0].VolumeML, 3))
		if !math.IsNaN(f.Outside[0].DepthMM) {
			out += fmt.Sprintf(", up to %s mm beyond the target", num(f.Outside[0].DepthMM, 1))
		}
	}
	right = append(right,
		[2]string{"Lethal volume", num(f.LethalML, 3) + " mL in all"},
		[2]string{"Holes in target", holes},
		[2]string{"Lethal outside margin", out},
	)
	if len(f.Avoid) == 0 {
		right = append(right, [2]string{"Lethal in avoid", "no avoid structure"})
	}
	for _, a := range f.Avoid {
		v := num(a.LethalML, 3) + " mL"
		if !math.IsNaN(a.MaxDose) {
			v += "; max dose " + dose(a.MaxDose) + " " + unit
		}
		right = append(right, [2]string{"Lethal in " + a.Name, v})
	}
	right = append(right, [2]string{"Dose model", orNA(f.Model)})
	return left, right
}

func doseUnit(in *Input) string {
	if in.Facts.DoseUnit == "" {
		return "CEM43 min"
	}
	return in.Facts.DoseUnit
}

func orNA(s string) string {
	if s == "" {
		return "n/a"
	}
	return s
}

// kv draws label/value rows in a column of width w: labels in fl, values
// in fv wrapped to the room right of the widest label. It returns the y
// below the last row.
func (p pen) kv(x, y, w vg.Length, fl, fv font.Face, rows [][2]string) vg.Length {
	var lw vg.Length
	for _, r := range rows {
		lw = max(lw, fl.Width(r[0]))
	}
	lw += 6
	for _, r := range rows {
		p.text(x, y, fl, colFaint, r[0])
		y = p.para(x+lw, y, w-lw, fv, colInk, r[1])
	}
	return y
}

func drawFacts(p pen, in *Input, x, y, w vg.Length) vg.Length {
	y = p.heading(x, y, w, "Coverage")
	left, right := factLines(in)
	fl := sans(bodySize, false)
	fv := sans(bodySize, true)
	// The headline figures, big, at the left: the covered part of the
	// monitored target and of the whole target, each labelled.
	fb := sans(18, true)
	fs := sans(smallSize, false)
	bw := fb.Width("100.0 %") + 12
	if c := in.Facts.Covered; math.IsNaN(c) {
		// Nothing of the target monitored: no figure, in words that fit
		// the figure's width.
		fm := sans(bodySize, true)
		p.text(x, y, fm, colInk, "not")
		p.text(x, y+fm.Extents().Height, fm, colInk, "measurable")
	} else {
		p.text(x, y, fb, colInk, pct(c))
	}
	yb := p.text(x, y+fb.Extents().Height, fs, colFaint, "covered, of the")
	yb = p.text(x, yb, fs, colFaint, "monitored part")
	yb += 2
	p.text(x, yb, fb, colInk, pct(in.Facts.CoveredOfTarget))
	yb = p.text(x, yb+fb.Extents().Height, fs, colFaint, "covered, of the")
	yb = p.text(x, yb, fs, colFaint, "whole target")
	lw := (w - bw - gap) * 0.47
	yl := p.kv(x+bw, y, lw, fl, fv, left)
	yr := p.kv(x+bw+lw+gap, y, w-bw-gap-lw, fl, fv, right)
	return max(yl, yr, yb)
}

func drawPanels(p pen, in *Input, x, y, w vg.Length) vg.Length {
	y = p.heading(x, y, w, "Planes")
	const n = 3
	pw := (w - 2*gap) / n
	fh := sans(bodySize, true)
	fc := sans(smallSize, false)
	side := pw * PanelAspect
	bottom := y
	for k := 0; k < n; k++ {
		px := x + vg.Length(k)*(pw+gap)
		var pan Panel
		if k < len(in.Panels) {
			pan = in.Panels[k]
		}
		yy := p.text(px, y, fh, colInk, orNA(pan.Title))
		yy += 1
		p.rect(px, yy, pw, side, colPanel)
		if pan.Image != nil && !pan.Image.Bounds().Empty() {
			b := pan.Image.Bounds()
			iw, ih := vg.Length(b.Dx()), vg.Length(b.Dy())
			s := vg.Length(math.Min(float64(pw/iw), float64(side/ih)))
			dw, dh := iw*s, ih*s
			ox, oy := px+(pw-dw)/2, yy+(side-dh)/2
			p.c.DrawImage(vg.Rectangle{Min: p.pt(ox, oy+dh), Max: p.pt(ox+dw, oy)}, pan.Image)
		} else {
			p.text(px+6, yy+6, fc, color.White, "no image")
		}
		yy += side + 1.5
		for _, l := range wrap(fc, pan.Caption, pw) {
			yy = p.text(px, yy, fc, colFaint, l)
		}
		if yy > bottom {
			bottom = yy
		}
	}
	return drawLegend(p, in, x, bottom+2, w)
}

// drawLegend explains the overlay colours and line styles of the panels.
func drawLegend(p pen, in *Input, x, y, w vg.Length) vg.Length {
	f := sans(smallSize, false)
	h := f.Extents().Height
	items := []struct {
		name  string
		clr   color.Color
		style int // 0 solid line, 1 dashed, 2 dotted, 3 fill, 4 thick line
	}{
		{"target", view.ColorTarget, 0},
		{"margin", view.ColorMargin, 1},
		{"lethal isoline", view.ColorLethal, 4},
		{"hole", view.ColorHole, 3},
		{"lethal outside margin", view.ColorSpill, 3},
		{"avoid", view.ColorAvoid, 2},
		{"not monitored", view.ColorNotMonitored, 3},
	}
	cx := x
	for _, it := range items {
		sw := vg.Length(16)
		p.rect(cx, y, sw, h, colPanel)
		mid := y + h/2
		switch it.style {
		case 0:
			p.line(cx+2, mid, cx+sw-2, mid, 1.2, it.clr, nil)
		case 1:
			p.line(cx+2, mid, cx+sw-2, mid, 1.2, it.clr, []vg.Length{2.5, 1.5})
		case 2:
			p.line(cx+2, mid, cx+sw-2, mid, 1.2, it.clr, []vg.Length{0.8, 1.2})
		case 3:
			p.rect(cx+3, y+2, sw-6, h-4, it.clr)
		case 4:
			p.line(cx+2, mid, cx+sw-2, mid, 2, it.clr, nil)
		}
		cx += sw + 2
		p.text(cx, y, f, colInk, it.name)
		cx += f.Width(it.name) + 8
	}
	if ws := in.Wash; ws != nil && ws.Floor > 0 && ws.Ceiling > ws.Floor {
		// The colour bar of the review window (view.WashBar), on its
		// own line.
		img, err := view.WashBar(view.DoseScale{Floor: ws.Floor, Ceiling: ws.Ceiling, Opacity: 1}, ws.Lethal, doseUnit(in), 420, 64)
		if err == nil {
			bh := vg.Length(24)
			bw := bh * 420 / 64
			y += h + 2
			p.c.DrawImage(vg.Rectangle{Min: p.pt(x, y+bh), Max: p.pt(x+bw, y)}, img)
			return y + bh
		}
	}
	return y + h
}

// plotFonts sets every text of pl to Liberation Sans at small sizes.
func plotFonts(pl *plot.Plot) {
	set := func(s *font.Font, size vg.Length) {
		s.Typeface, s.Variant, s.Size = "Liberation", "Sans", size
	}
	set(&pl.Title.TextStyle.Font, headSize-1)
	set(&pl.X.Label.TextStyle.Font, smallSize)
	set(&pl.Y.Label.TextStyle.Font, smallSize)
	set(&pl.X.Tick.Label.Font, smallSize-0.5)
	set(&pl.Y.Tick.Label.Font, smallSize-0.5)
	set(&pl.Legend.TextStyle.Font, smallSize-0.5)
	pl.Title.TextStyle.Color = colInk
	pl.Title.TextStyle.Font.Variant = boldVariant
	pl.X.Padding, pl.Y.Padding = 2, 2
	pl.Legend.Top = false
	pl.Legend.Left = true
	pl.Legend.XOffs, pl.Legend.YOffs = 4, 4
	pl.Legend.ThumbnailWidth = 12
}

// logTicks labels a log axis at decades.
type logTicks struct{}

func (logTicks) Ticks(min, max float64) []plot.Tick {
	label := func(v float64) string { return strings.Replace(fmt.Sprintf("%g", v), "e+0", "e", 1) }
	// Over less than two decades label 2 and 5 times the powers of ten too.
	few := math.Log10(max/min) < 2
	var ts []plot.Tick
	for e := math.Floor(math.Log10(min)); e <= math.Ceil(math.Log10(max)); e++ {
		v := math.Pow(10, e)
		for m := 1.0; m < 10; m++ {
			mv := m * v
			if mv < min*0.999 || mv > max*1.001 {
				continue
			}
			t := plot.Tick{Value: mv}
			if m == 1 || (few && (m == 2 || m == 5)) {
				t.Label = label(mv)
			}
			ts = append(ts, t)
		}
	}
	return ts
}

// curvePlot builds a log-x plot of pts with the threshold marked.
func curvePlot(title, xlabel, ylabel string, pts []CurvePoint, threshold float64, clr color.Color, legend string) *plot.Plot {
	pl := plot.New()
	plotFonts(pl)
	pl.Title.Text = title
	pl.X.Label.Text = xlabel
	pl.Y.Label.Text = ylabel
	pl.Y.Min, pl.Y.Max = 0, 100
	var xy, lo, hi plotter.XYs
	xmin, xmax := math.Inf(1), math.Inf(-1)
	for _, q := range pts {
		if !(q.X > 0) || math.IsNaN(q.Y) || math.IsInf(q.X, 0) {
			continue
		}
		xy = append(xy, plotter.XY{X: q.X, Y: 100 * q.Y})
		if !math.IsNaN(q.Low) && !math.IsNaN(q.High) {
			lo = append(lo, plotter.XY{X: q.X, Y: 100 * q.Low})
			hi = append(hi, plotter.XY{X: q.X, Y: 100 * q.High})
		}
		xmin, xmax = math.Min(xmin, q.X), math.Max(xmax, q.X)
	}
	if len(xy) < 2 {
		// No curve (no part of the target monitored): said in the title,
		// not left as empty axes.
		pl.Title.Text = title + ": not measurable"
		pl.X.Min, pl.X.Max = 1, 1000
		pl.X.Scale = plot.LogScale{}
		pl.X.Tick.Marker = logTicks{}
		return pl
	}
	if threshold > 0 {
		xmin, xmax = math.Min(xmin, threshold), math.Max(xmax, threshold)
	}
	pl.X.Min, pl.X.Max = xmin, xmax
	pl.X.Scale = plot.LogScale{}
	pl.X.Tick.Marker = logTicks{}
	pl.Add(plotter.NewGrid())
	if len(lo) >= 2 && len(lo) == len(xy) {
		poly := append(plotter.XYs{}, lo...)
		for n := len(hi) - 1; n >= 0; n-- {
			poly = append(poly, hi[n])
		}
		if pg, err := plotter.NewPolygon(poly); err == nil {
			pg.Color = color.Gray{0xD8}
			pg.LineStyle.Width = 0
			pl.Add(pg)
			pl.Legend.Add("uncertainty band", pg)
		}
	}
	if l, err := plotter.NewLine(xy); err == nil {
		l.Color = clr
		l.Width = 1.4
		pl.Add(l)
		if legend != "" {
			pl.Legend.Add(legend, l)
		}
	}
	if threshold > 0 {
		if t, err := plotter.NewLine(plotter.XYs{{X: threshold, Y: 0}, {X: threshold, Y: 100}}); err == nil {
			t.Color = colInk
			t.Width = 0.8
			t.Dashes = []vg.Length{3, 2}
			pl.Add(t)
			pl.Legend.Add(fmt.Sprintf("threshold %s", dose(threshold)), t)
		}
	}
	return pl
}

func drawPlots(p pen, in *Input, x, y, w vg.Length) vg.Length {
	const h = 128
	pw := (w - gap) / 2
	unit := doseUnit(in)
	dvh := curvePlot("Target dose-volume histogram", "dose ("+unit+", log)", "volume >= dose (%)", in.DVH, in.Facts.Threshold, view.ColorTarget, "target")
	cov := curvePlot("Coverage versus threshold", "threshold ("+unit+", log)", "covered (%)", in.CoverageVsThreshold, in.Facts.Threshold, colInk, "covered")
	for k, pl := range []*plot.Plot{dvh, cov} {
		px := x + vg.Length(k)*(pw+gap)
		dc := draw.Canvas{Canvas: p.c, Rectangle: vg.Rectangle{Min: p.pt(px, y+h), Max: p.pt(px+pw, y)}}
		pl.Draw(dc)
	}
	return y + h
}

// drawTables draws the sonication table and the quality summary side by
// side, keeping both above bottom: rows and notes that do not fit are
// counted in a last line instead (the metrics files hold them all).
func drawTables(p pen, in *Input, x, y, w, bottom vg.Length, pages int) (vg.Length, int) {
	tw := w * 0.64
	qx := x + tw + gap
	qw := w - tw - gap
	yt, next := drawSonications(p, in, x, y, tw, bottom, 0, 1, pages)
	yq := drawQuality(p, in, qx, y, qw, bottom)
	return vg.Length(math.Max(float64(yt), float64(yq))), next
}

// minRows is the number of sonication rows shown however full the page.
const minRows = 4

// drawSonications draws the sonication table from row from on, as many
// rows as fit above bottom (at least minRows); when rows are left, its last
// line says which page of pages they continue on. It returns the y below
// the table and the first row not shown.
func drawSonications(p pen, in *Input, x, y, w, bottom vg.Length, from, page, pages int) (vg.Length, int) {
	title := "Sonications"
	if page > 1 {
		title = fmt.Sprintf("Sonications (continued from page %d)", page-1)
	}
	y = p.heading(x, y, w, title)
	fh := sans(smallSize, true)
	fb := sans(smallSize, false)
	cols := []struct {
		name  string
		width float64 // fraction of w
		right bool
	}{
		{"#", 0.04, true}, {"label", 0.27, false}, {"frames", 0.07, true}, {"peak °C", 0.08, true},
		{"+lethal mL", 0.11, true}, {"+cover", 0.09, true}, {"out mL", 0.08, true}, {"flag", 0.06, true},
		{"cooled s", 0.09, true}, {"resid. °C", 0.11, true},
	}
	xs := make([]vg.Length, len(cols)+1)
	xs[0] = x
	for n, c := range cols {
		xs[n+1] = xs[n] + w*vg.Length(c.width)
	}
	cell := func(n int, y vg.Length, f font.Face, clr color.Color, s string) {
		if cols[n].right {
			p.textRight(xs[n+1]-3, y, f, clr, s)
			return
		}
		p.text(xs[n], y, f, clr, clip(f, s, xs[n+1]-xs[n]-2))
	}
	for n, c := range cols {
		cell(n, y, fh, colInk, c.name)
	}
	y += fh.Extents().Height + 1
	if len(in.Sonications) == 0 {
		return p.text(x, y, fb, colFaint, "no sonications"), 0
	}
	rh := fb.Extents().Height
	rows := max(minRows, int((bottom-y)/rh))
	for r := from; r < len(in.Sonications); r++ {
		s := in.Sonications[r]
		if r-from == rows-1 && len(in.Sonications)-from > rows {
			total := "a further page"
			if pages > 0 {
				total = fmt.Sprintf("page %d of %d", page+1, pages)
			}
			y = p.text(x, y, sans(smallSize, true), colInk, fmt.Sprintf("Continued on %s: sonications %d to %d (%d more).",
				total, s.Number, in.Sonications[len(in.Sonications)-1].Number, len(in.Sonications)-r))
			return y, r
		}
		if (r-from)%2 == 1 {
			p.rect(x, y, w, rh, colShade)
		}
		clr := color.Color(colInk)
		label := s.Label
		if s.Excluded {
			clr = colFaint
			label = "(left out) " + label
		}
		cell(0, y, fb, clr, fmt.Sprintf("%d", s.Number))
		cell(1, y, fb, clr, label)
		cell(2, y, fb, clr, fmt.Sprintf("%d", s.Frames))
		cell(3, y, fb, clr, num(s.PeakC, 1))
		cell(4, y, fb, clr, num(s.LethalML, 3))
		cell(5, y, fb, clr, pct(s.AddedCoverage))
		cell(6, y, fb, clr, num(s.OutsideML, 3))
		flag := fmt.Sprintf("%d", s.Flagged)
		if s.DriftFlagged {
			flag = "drift, " + flag
		}
		cell(7, y, fb, clr, flag)
		cell(8, y, fb, clr, num(s.CoolingS, 0))
		cell(9, y, fb, clr, num(s.ResidualC, 1))
		y += rh
	}
	return y, len(in.Sonications)
}

func drawQuality(p pen, in *Input, x, y, w, bottom vg.Length) vg.Length {
	y = p.heading(x, y, w, "Thermometry quality")
	q := in.Quality
	fl := sans(smallSize, false)
	fv := sans(smallSize, true)
	y = p.kv(x, y, w, fl, fv, [][2]string{
		{"frames analysed", fmt.Sprintf("%d", q.Frames)},
		{"frames flagged", fmt.Sprintf("%d", q.Flagged)},
		{"largest motion index", num(q.MaxMotion, 3) + " (1 − correlation)"},
		{"largest drift", num(q.MaxDriftC, 2) + " °C"},
		{fmt.Sprintf("drift above %g °C", q.DriftFlagC), driftList(q.DriftFlagged)},
		{"lowest SNR", num(q.MinSNR, 0)},
		{"suspected phase wraps", fmt.Sprintf("%d", q.Wraps)},
		{"invalidated voxels", fmt.Sprintf("%d voxel-frames", q.Invalid)},
	})
	lh := fl.Extents().Height
	for n, note := range q.Notes {
		lines := wrap(fl, "- "+note, w)
		// Room for this note and, unless it is the last, a closing line.
		need := vg.Length(len(lines)) * lh
		if n < len(q.Notes)-1 {
			need += lh
		}
		if y+need > bottom {
			y = p.text(x, y, fl, colFaint, fmt.Sprintf("... %s in the metrics JSON", plural(len(q.Notes)-n, "more note")))
			break
		}
		for _, l := range lines {
			y = p.text(x, y, fl, colInk, l)
		}
	}
	return y
}

func drawMethods(p pen, in *Input, x, y, w vg.Length) vg.Length {
	y = p.heading(x, y, w, "Methods and settings")
	fl := sans(smallSize, false)
	fv := sans(smallSize, true)
	colW := (w - gap) / 2
	half := (len(in.Methods) + 1) / 2
	var l, r [][2]string
	for n, s := range in.Methods {
		if n < half {
			l = append(l, [2]string{s.Name, s.Value})
		} else {
			r = append(r, [2]string{s.Name, s.Value})
		}
	}
	y = max(p.kv(x, y, colW, fl, fv, l), p.kv(x+colW+gap, y, colW, fl, fv, r)) + 2
	sha := in.InputsSHA256
	if sha == "" {
		sha = "not computed"
	}
	sw := in.Software
	if sw == "" {
		sw = "dosecover"
	}
	lw := fl.Width("Inputs SHA-256") + 6
	p.text(x, y, fl, colFaint, "Inputs SHA-256")
	y = p.text(x+lw, y, mono(smallSize), colInk, sha)
	p.text(x, y, fl, colFaint, "Software")
	return p.text(x+lw, y, fv, colInk, sw)
}

// footLines returns the wrapped lines of the cautions box.
func footLines(in *Input, w vg.Length) []string {
	f := sans(smallSize, false)
	var lines []string
	for _, c := range in.cautions() {
		lines = append(lines, wrap(f, c, w-12)...)
	}
	return lines
}

// footHeight returns the height of the cautions box.
func footHeight(in *Input, w vg.Length) vg.Length {
	fb, f := sans(smallSize, true), sans(smallSize, false)
	return fb.Extents().Height + vg.Length(len(footLines(in, w)))*f.Extents().Height + 6
}

func drawFoot(p pen, in *Input, x, y, w vg.Length, page, pages int) {
	f := sans(smallSize, false)
	fb := sans(smallSize, true)
	lines := footLines(in, w)
	h := footHeight(in, w)
	// Anchor the cautions to the bottom margin when there is room.
	if yb := PageHeight - margin - h; yb > y {
		y = yb
	}
	p.rect(x, y, w, h, colShade)
	p.rect(x, y, 2, h, colAccent)
	yy := p.text(x+6, y+3, fb, colInk, "Cautions")
	if pages > 1 {
		p.textRight(x+w-6, y+3, fb, colInk, fmt.Sprintf("page %d of %d", page, pages))
	}
	for _, l := range lines {
		yy = p.text(x+6, yy, f, colInk, l)
	}
}

// PanelAspect is the height of an image panel over its width.
const PanelAspect = 0.82

// PanelSize returns the size in pixels of one image panel of the page at
// dpi, so panels can be rendered at the page's own resolution.
func PanelSize(dpi float64) image.Point {
	w := (PageWidth - 2*margin - 2*gap) / 3
	return image.Pt(int(w.Dots(dpi)), int((w * PanelAspect).Dots(dpi)))
}

// plural returns "1 thing" or "n things".
func plural(n int, thing string) string {
	if n == 1 {
		return "1 " + thing
	}
	return fmt.Sprintf("%d %ss", n, thing)
}

// driftList names the sonications flagged for drift: "none" or
// "sonications 3, 5".
func driftList(nums []int) string {
	if len(nums) == 0 {
		return "none"
	}
	parts := make([]string, len(nums))
	for n, x := range nums {
		parts[n] = fmt.Sprint(x)
	}
	if len(nums) == 1 {
		return "sonication " + parts[0]
	}
	return "sonications " + strings.Join(parts, ", ")
}

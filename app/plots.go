//go:build cgo

package main

import (
	"fmt"
	"image"
	"image/color"
	stddraw "image/draw"
	"math"

	"dosecover/review"
	"dosecover/review/view"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/canvas"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// Plot colours on the dark panels. Curves take the overlay palette
// (review/palette.go); the temperature curve is vermillion and the 3×3 mean
// sky blue, never a red–green pair.
var (
	plotBackground = color.RGBA{0x1E, 0x1F, 0x23, 0xFF}
	plotInk        = color.RGBA{0xE0, 0xE0, 0xE0, 0xFF}
	plotGrid       = color.RGBA{0x44, 0x46, 0x4C, 0xFF}
	plotGuide      = color.RGBA{0xB0, 0xB0, 0xB0, 0xFF}
)

// plotView shows a gonum plot, drawn afresh at the widget's pixel size.
type plotView struct {
	raster *canvas.Raster
	build  func() *plot.Plot // nil: empty panel
	below  func() *plot.Plot // a second plot under the first (its lower 40 %); nil: none
}

func newPlotView() *plotView {
	pv := &plotView{}
	pv.raster = canvas.NewRaster(pv.draw)
	pv.raster.SetMinSize(fyne.NewSize(240, 170))
	return pv
}

// set replaces the plot (nil clears it) and redraws.
func (pv *plotView) set(build func() *plot.Plot) {
	pv.build = build
	pv.raster.Refresh()
}

func (pv *plotView) draw(w, h int) image.Image {
	if pv.build == nil || w < 20 || h < 20 {
		img := image.NewRGBA(image.Rect(0, 0, max(w, 1), max(h, 1)))
		fillRGBA(img, plotBackground)
		return img
	}
	p := pv.build()
	scale := 1.0
	if c := fyne.CurrentApp().Driver().CanvasForObject(pv.raster); c != nil && c.Scale() > 0 {
		scale = float64(c.Scale())
	}
	if pv.below != nil {
		return renderPlotsImage(p, pv.below(), w, h, scale)
	}
	return renderPlotImage(p, w, h, scale)
}

// renderPlotsImage draws top over the upper 60 % and bottom under it, in
// one w×h image.
func renderPlotsImage(top, bottom *plot.Plot, w, h int, scale float64) *image.RGBA {
	dpi := int(96 * scale)
	c := vgimg.NewWith(vgimg.UseWH(vg.Length(w)/vg.Length(dpi)*vg.Inch, vg.Length(h)/vg.Length(dpi)*vg.Inch),
		vgimg.UseDPI(dpi), vgimg.UseBackgroundColor(plotBackground))
	dc := draw.New(c)
	split := dc.Max.Y - dc.Min.Y
	top.Draw(draw.Crop(dc, 0, 0, split*0.4, 0))
	bottom.Draw(draw.Crop(dc, 0, 0, 0, -split*0.6))
	if img, ok := c.Image().(*image.RGBA); ok {
		return img
	}
	img := image.NewRGBA(c.Image().Bounds())
	stddraw.Draw(img, img.Bounds(), c.Image(), image.Point{}, stddraw.Src)
	return img
}

// probeDosePlot is the dose accumulated at the pinned point over the
// session (log scale from a hundredth of the threshold), with the
// threshold and the moment it was reached.
func probeDosePlot(c *review.Probe) *plot.Plot {
	p := newStyledPlot("", "time from the first sonication (s)", "dose ("+c.Unit+")")
	floor := c.Threshold / 100
	if !(floor > 0) {
		floor = 1
	}
	var pts plotter.XYs
	hi := c.Threshold * 10
	for n, t := range c.Times {
		if n < len(c.Dose) && !math.IsNaN(c.Dose[n]) {
			pts = append(pts, plotter.XY{X: t, Y: math.Max(c.Dose[n], floor)})
			hi = math.Max(hi, c.Dose[n]*1.5)
		}
	}
	p.Y.Scale = plot.LogScale{}
	p.Y.Tick.Marker = plot.LogTicks{Prec: -1}
	p.Y.Min, p.Y.Max = floor, hi
	addSegments(p, pts, c.Boundaries, view.ColorTarget, vg.Points(1.5), nil, "cumulative dose")
	if len(c.Times) > 0 {
		addLine(p, plotter.XYs{{X: c.Times[0], Y: c.Threshold}, {X: c.Times[len(c.Times)-1], Y: c.Threshold}}, plotGuide, vg.Points(1), []vg.Length{vg.Points(2), vg.Points(2)}, "lethal "+fmtNum(c.Threshold)+" "+c.Unit)
	}
	for _, b := range c.Boundaries {
		addVLine(p, b, floor, hi, plotGrid, nil, "")
	}
	return p
}

// renderPlotImage draws p into a w×h image; scale enlarges text and lines
// on high-density screens.
func renderPlotImage(p *plot.Plot, w, h int, scale float64) *image.RGBA {
	dpi := int(96 * scale)
	c := vgimg.NewWith(vgimg.UseWH(vg.Length(w)/vg.Length(dpi)*vg.Inch, vg.Length(h)/vg.Length(dpi)*vg.Inch),
		vgimg.UseDPI(dpi), vgimg.UseBackgroundColor(plotBackground))
	p.Draw(draw.New(c))
	if img, ok := c.Image().(*image.RGBA); ok {
		return img
	}
	img := image.NewRGBA(c.Image().Bounds())
	stddraw.Draw(img, img.Bounds(), c.Image(), image.Point{}, stddraw.Src)
	return img
}

func fillRGBA(img *image.RGBA, c color.RGBA) {
	for n := 0; n < len(img.Pix); n += 4 {
		img.Pix[n], img.Pix[n+1], img.Pix[n+2], img.Pix[n+3] = c.R, c.G, c.B, c.A
	}
}

// newStyledPlot returns a plot styled for the dark panels.
func newStyledPlot(title, xLabel, yLabel string) *plot.Plot {
	p := plot.New()
	p.BackgroundColor = plotBackground
	p.Title.Text = title
	p.Title.TextStyle.Color = plotInk
	p.Title.TextStyle.Font.Size = vg.Points(10)
	p.Title.TextStyle.Font.Variant = "Sans"
	for _, ax := range []*plot.Axis{&p.X, &p.Y} {
		ax.Color = plotInk
		ax.Label.TextStyle.Color = plotInk
		ax.Label.TextStyle.Font = font.From(font.Font{Typeface: "Liberation", Variant: "Sans"}, 9)
		ax.Tick.Label.Color = plotInk
		ax.Tick.Label.Font = font.From(font.Font{Typeface: "Liberation", Variant: "Sans"}, 8)
		ax.Tick.Color = plotInk
	}
	p.X.Label.Text = xLabel
	p.Y.Label.Text = yLabel
	p.Legend.TextStyle.Color = plotInk
	p.Legend.TextStyle.Font = font.From(font.Font{Typeface: "Liberation", Variant: "Sans"}, 8)
	// Bottom left, near the axis and short, so that a threshold guide in
	// the middle of the axis passes beside it; a little space between
	// entries keeps their texts apart.
	p.Legend.Top = false
	p.Legend.Left = true
	p.Legend.XOffs = vg.Points(6)
	p.Legend.YOffs = vg.Points(6)
	p.Legend.Padding = vg.Points(2)
	p.Title.Padding = vg.Points(6)
	g := plotter.NewGrid()
	g.Vertical.Color = plotGrid
	g.Horizontal.Color = plotGrid
	p.Add(g)
	return p
}

// addLine adds a curve; dashes nil for a solid line.
func addLine(p *plot.Plot, pts plotter.XYs, c color.Color, width vg.Length, dashes []vg.Length, legend string) {
	if len(pts) == 0 {
		return
	}
	l, err := plotter.NewLine(pts)
	if err != nil {
		return // NaN or Inf points: nothing sensible to draw
	}
	l.Color = c
	l.Width = width
	l.Dashes = dashes
	p.Add(l)
	if legend != "" {
		p.Legend.Add(legend, l)
	}
}

// addVLine draws a vertical guide at x across the current y range.
func addVLine(p *plot.Plot, x, y0, y1 float64, c color.Color, dashes []vg.Length, legend string) {
	addLine(p, plotter.XYs{{X: x, Y: y0}, {X: x, Y: y1}}, c, vg.Points(1), dashes, legend)
}

// finiteXYs drops the points with a NaN or infinite coordinate; on a log
// axis it also drops non-positive x.
func finiteXYs(pts []xy, logX bool) plotter.XYs {
	out := make(plotter.XYs, 0, len(pts))
	for _, q := range pts {
		if math.IsNaN(q.X) || math.IsNaN(q.Y) || math.IsInf(q.X, 0) || math.IsInf(q.Y, 0) || (logX && q.X <= 0) {
			continue
		}
		out = append(out, plotter.XY{X: q.X, Y: q.Y})
	}
	return out
}

// dvhPlot is the cumulative dose–volume histogram of the target (ICRU
// Report 83: V(d) = fraction of the volume receiving at least d), dose on a
// log axis, the threshold as a dashed guide.
func dvhPlot(r *analysisResult) *plot.Plot {
	p := newStyledPlot("Target dose–volume histogram", "dose ("+r.Unit+", log scale)", "% of target ≥ dose")
	pts := finiteXYs(r.DVHPoints, true)
	for n := range pts {
		pts[n].Y *= 100
	}
	p.X.Scale = plot.LogScale{}
	p.X.Tick.Marker = plot.LogTicks{Prec: -1}
	// Show from a hundredth of the threshold to twice the highest dose
	// any part of the target received.
	lo, hi := r.Threshold/100, r.Threshold*10
	for _, q := range pts {
		if q.Y > 0 && q.X*2 > hi {
			hi = q.X * 2
		}
	}
	var shown plotter.XYs
	for _, q := range pts {
		if q.X >= lo && q.X <= hi {
			shown = append(shown, q)
		}
	}
	if len(shown) < 2 {
		p.Title.Text += ": not measurable" // no part of the target monitored
	}
	addLine(p, shown, view.ColorTarget, vg.Points(2), nil, "target")
	addVLine(p, r.Threshold, 0, 100, plotGuide, []vg.Length{vg.Points(4), vg.Points(3)}, "threshold "+fmtNum(r.Threshold)) // the unit is on the axis
	p.X.Min, p.X.Max = lo, hi
	p.Y.Min, p.Y.Max = 0, 100
	return p
}

// coveragePlot shows the covered fraction against the threshold, the
// threshold in use as a guide.
func coveragePlot(r *analysisResult) *plot.Plot {
	p := newStyledPlot("Coverage versus threshold", "threshold ("+r.Unit+", log scale)", "% of target covered")
	pts := finiteXYs(r.CoveragePoints, true)
	for n := range pts {
		pts[n].Y *= 100
	}
	p.X.Scale = plot.LogScale{}
	p.X.Tick.Marker = plot.LogTicks{Prec: -1}
	if len(pts) < 2 {
		p.Title.Text += ": not measurable" // no part of the target monitored
	}
	addLine(p, pts, view.ColorMargin, vg.Points(2), nil, "covered")
	addVLine(p, r.Threshold, 0, 100, plotGuide, []vg.Length{vg.Points(4), vg.Points(3)}, "in use "+fmtNum(r.Threshold))
	p.Y.Min, p.Y.Max = 0, 100
	return p
}

// probePlot shows the temperature history of the pinned point: the voxel,
// the 3×3 in-plane mean, the voxel with the estimated heat left from
// earlier sonications added (where there is some), the 43 °C level and the
// moment the cumulative dose reached the threshold.
func probePlot(c *review.Probe) *plot.Plot {
	p := newStyledPlot("Temperature of "+c.Description, "time from the first sonication (s)", "temperature (°C)")
	p.Legend.Top, p.Legend.Left = true, false
	p.Legend.XOffs = -vg.Points(8)
	var vox, mean, est plotter.XYs
	lo, hi := math.Inf(1), math.Inf(-1)
	for n, t := range c.Times {
		if n < len(c.True) && !math.IsNaN(c.True[n]) && c.True[n] != c.Temp[n] {
			est = append(est, plotter.XY{X: t, Y: c.True[n]})
			lo, hi = math.Min(lo, c.True[n]), math.Max(hi, c.True[n])
		}
		if v := c.Temp[n]; !math.IsNaN(v) {
			vox = append(vox, plotter.XY{X: t, Y: v})
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		if n < len(c.Mean) && !math.IsNaN(c.Mean[n]) {
			mean = append(mean, plotter.XY{X: t, Y: c.Mean[n]})
		}
	}
	if math.IsInf(lo, 0) {
		lo, hi = 35, 45
	}
	lo, hi = math.Min(lo, 36)-1, math.Max(hi, 44)+1
	for _, b := range c.Boundaries {
		addVLine(p, b, lo, hi, plotGrid, nil, "")
	}
	// Split the curves at gaps between sonications so no line bridges them.
	addSegments(p, vox, c.Boundaries, view.ColorSpill, vg.Points(1.5), nil, "voxel")
	addSegments(p, mean, c.Boundaries, view.ColorTarget, vg.Points(1.5), []vg.Length{vg.Points(5), vg.Points(2)}, "3×3 mean")
	if len(est) > 0 {
		addSegments(p, est, c.Boundaries, view.ColorHole, vg.Points(1.5), []vg.Length{vg.Points(1.5), vg.Points(2)}, "voxel + estimated residual heat")
	}
	if len(c.Times) > 0 {
		addLine(p, plotter.XYs{{X: c.Times[0], Y: 43}, {X: c.Times[len(c.Times)-1], Y: 43}}, plotGuide, vg.Points(1), []vg.Length{vg.Points(2), vg.Points(2)}, "43 °C")
	}
	if !math.IsNaN(c.LethalAt) {
		addVLine(p, c.LethalAt, lo, hi, view.ColorLethal, []vg.Length{vg.Points(6), vg.Points(2)}, "reached "+fmtNum(c.Threshold)+" "+c.Unit)
	}
	p.Y.Min, p.Y.Max = lo, hi
	// The sonication numbers along the time axis, at each start.
	if len(c.Numbers) == len(c.Boundaries) && len(c.Numbers) > 0 {
		var at plotter.XYs
		var names []string
		for n, b := range c.Boundaries {
			at = append(at, plotter.XY{X: b, Y: hi - 0.02*(hi-lo)})
			names = append(names, fmt.Sprint(c.Numbers[n]))
		}
		if l, err := plotter.NewLabels(plotter.XYLabels{XYs: at, Labels: names}); err == nil {
			for n := range l.TextStyle {
				l.TextStyle[n].Color = plotInk
				l.TextStyle[n].Font = font.From(font.Font{Typeface: "Liberation", Variant: "Sans"}, 8)
				l.TextStyle[n].YAlign = -1
				l.TextStyle[n].XAlign = -0.5
			}
			p.Add(l)
		}
	}
	return p
}

// addSegments adds pts as separate lines between consecutive boundaries.
func addSegments(p *plot.Plot, pts plotter.XYs, bounds []float64, c color.Color, w vg.Length, dashes []vg.Length, legend string) {
	var seg plotter.XYs
	b := 1
	flush := func() {
		if len(seg) > 0 {
			addLine(p, seg, c, w, dashes, legend)
			legend = ""
			seg = nil
		}
	}
	for _, q := range pts {
		for b < len(bounds) && q.X >= bounds[b] {
			flush()
			b++
		}
		seg = append(seg, q)
	}
	flush()
}

// plotPlot is a gonum plot; the alias keeps panel code free of the import.
type plotPlot = plot.Plot

package audit

import (
	"fmt"
	"image/color"
	"io"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"dosecover/review/view"
)

// Figure size and resolution of summary.png.
const (
	figureWidth  = 10 * vg.Inch
	figureHeight = 4.6 * vg.Inch
	figureDPI    = 100
)

// coverageBins is the width of one histogram bin in percent.
const coverageBins = 5.0

// WriteFigure draws the summary figure of rows as PNG: on the left the
// distribution of coverage over the analysed cases (histogram in 5 % bins
// from 0 to 100 %), on the right the lethal volume outside the margin
// against coverage, one point per case; below, the case counts and the
// cautions. Cases without a coverage figure are left out of both panels
// and counted in the caption.
func WriteFigure(w io.Writer, rows []Row) error {
	var cov []float64
	var pts plotter.XYs
	ok, inc, failed, noCov := 0, 0, 0, 0
	for _, r := range rows {
		switch r.Status {
		case StatusIncomplete:
			inc++
			continue
		case StatusFailed:
			failed++
			continue
		}
		ok++
		c := float64(r.Metrics.CoveragePct)
		if math.IsNaN(c) {
			noCov++
			continue
		}
		cov = append(cov, c)
		if o := float64(r.Metrics.OutsideMarginML); !math.IsNaN(o) {
			pts = append(pts, plotter.XY{X: c, Y: o})
		}
	}

	left := plot.New()
	left.Title.Text = "Coverage of the target"
	left.X.Label.Text = "coverage (% of the monitored target at or above the threshold)"
	left.Y.Label.Text = "cases"
	left.X.Min, left.X.Max = 0, 100
	left.Y.Min = 0
	nb := int(100 / coverageBins)
	h := &plotter.Histogram{Bins: make([]plotter.HistogramBin, nb), Width: coverageBins, FillColor: view.ColorTarget}
	h.LineStyle = draw.LineStyle{Color: color.Black, Width: vg.Points(0.5)}
	for k := range h.Bins {
		h.Bins[k].Min = float64(k) * coverageBins
		h.Bins[k].Max = float64(k+1) * coverageBins
	}
	for _, c := range cov {
		k := int(c / coverageBins)
		k = max(0, min(k, nb-1)) // 100 % falls into the last bin
		h.Bins[k].Weight++
	}
	left.Add(h)
	left.Y.Max = 1
	for _, b := range h.Bins {
		left.Y.Max = math.Max(left.Y.Max, b.Weight)
	}
	left.Y.Tick.Marker = integerTicks{}

	right := plot.New()
	right.Title.Text = "Lethal volume outside the margin"
	right.X.Label.Text = "coverage (%)"
	right.Y.Label.Text = "outside margin (mL)"
	right.X.Min, right.X.Max = 0, 100
	right.Y.Min, right.Y.Max = 0, 1
	for _, p := range pts {
		right.Y.Max = math.Max(right.Y.Max, p.Y*1.05)
	}
	if len(pts) > 0 {
		s, err := plotter.NewScatter(pts)
		if err != nil {
			return fmt.Errorf("summary figure: %w", err)
		}
		s.GlyphStyle = draw.GlyphStyle{Color: view.ColorSpill, Radius: vg.Points(3), Shape: draw.CircleGlyph{}}
		right.Add(s)
	}
	right.Add(plotter.NewGrid())

	c := vgimg.NewWith(vgimg.UseWH(figureWidth, figureHeight), vgimg.UseDPI(figureDPI), vgimg.UseBackgroundColor(color.White))
	dc := draw.New(c)
	caption := 0.55 * vg.Inch
	top := draw.Crop(dc, 0, 0, caption, 0)
	tiles := draw.Tiles{Rows: 1, Cols: 2, PadX: vg.Inch / 4, PadTop: vg.Inch / 10, PadLeft: vg.Inch / 10, PadRight: vg.Inch / 5}
	canvases := plot.Align([][]*plot.Plot{{left, right}}, tiles, top)
	left.Draw(canvases[0][0])
	right.Draw(canvases[0][1])

	sty := text.Style{
		Color:   color.Black,
		Font:    font.From(plot.DefaultFont, 9),
		Handler: plot.DefaultTextHandler,
		XAlign:  draw.XLeft,
		YAlign:  draw.YBottom,
	}
	counts := fmt.Sprintf("%d cases: %d analysed (%d without a coverage figure), %d incomplete, %d failed.",
		len(rows), ok, noCov, inc, failed)
	dc.FillText(sty, vg.Point{X: vg.Inch / 8, Y: 0.3 * vg.Inch}, counts)
	dc.FillText(sty, vg.Point{X: vg.Inch / 8, Y: 0.1 * vg.Inch}, Caution)

	if _, err := (vgimg.PngCanvas{Canvas: c}).WriteTo(w); err != nil {
		return fmt.Errorf("summary figure: %w", err)
	}
	return nil
}

// integerTicks marks whole numbers only (case counts).
type integerTicks struct{}

// Ticks returns about five ticks at whole numbers between min and max.
func (integerTicks) Ticks(min, max float64) []plot.Tick {
	step := math.Max(1, math.Ceil((max-min)/5))
	var ts []plot.Tick
	for v := math.Ceil(min); v <= max; v += step {
		ts = append(ts, plot.Tick{Value: v, Label: fmt.Sprintf("%.0f", v)})
	}
	return ts
}

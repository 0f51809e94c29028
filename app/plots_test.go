//go:build cgo

package main

import (
	"fmt"
	"image"
	"math"
	"testing"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"dosecover/review"
)

// TestPlotLegendBesideThreshold draws the target DVH and the coverage
// versus threshold plots at the size the window gives them (460×330 px)
// for thresholds at the low, middle and high end of what the axes show,
// and checks that the dashed threshold guide does not run through the
// legend: the legend's pixels (those that change when its entries are
// left out) lie wholly to one side of the guide's column (the threshold's
// position from the plot's own data canvas and axis, gonum/plot's API).
// The curves are synthetic decreasing profiles (common practice: a
// cumulative DVH never increases, ICRU Report 83).
func TestPlotLegendBesideThreshold(t *testing.T) {
	const wPt, hPt = 345, 247.5 // 460×330 px at vgimg's 96 dpi
	profile := func(lo, hi, mid float64) []xy {
		var out []xy
		for e := math.Log10(lo); e <= math.Log10(hi); e += 0.05 {
			d := math.Pow(10, e)
			out = append(out, xy{X: d, Y: 1 / (1 + math.Pow(d/mid, 3))})
		}
		return out
	}
	cases := []struct {
		thr, maxDose float64
	}{
		{240, 3500},  // the demo on screen
		{240, 1e6},   // a very hot spot: the threshold far left on the axis
		{240, 2400},  // the threshold at two thirds of the axis
		{20, 300},    // a low threshold
		{1000, 9000}, // a high one
	}
	for _, tc := range cases {
		r := &analysisResult{Result: &review.Result{Threshold: tc.thr}, Unit: "CEM43 min",
			DVHPoints:      profile(tc.thr/1000, tc.maxDose*4, tc.maxDose/2),
			CoveragePoints: profile(tc.thr/10, tc.thr*4, tc.thr*3)}
		r.Threshold = tc.thr
		for name, build := range map[string]func(*analysisResult) *plot.Plot{"dvh": dvhPlot, "coverage": coveragePlot} {
			t.Run(fmt.Sprintf("%s_%g_%g", name, tc.thr, tc.maxDose), func(t *testing.T) {
				render := func(p *plot.Plot) (image.Image, draw.Canvas, *vgimg.Canvas) {
					img := vgimg.New(vg.Points(wPt), vg.Points(hPt))
					dc := draw.New(img)
					p.Draw(dc)
					return img.Image(), dc, img
				}
				full, dc, img := render(build(r))
				bare := build(r)
				bare.Legend = plot.NewLegend()
				noLegend, _, _ := render(bare)
				b := full.Bounds()
				x0, x1 := b.Max.X, -1
				for y := b.Min.Y; y < b.Max.Y; y++ {
					for x := b.Min.X; x < b.Max.X; x++ {
						if full.At(x, y) != noLegend.At(x, y) {
							x0, x1 = min(x0, x), max(x1, x)
						}
					}
				}
				if x1 < 0 {
					t.Fatal("the legend draws nothing")
				}
				p := build(r)
				data := p.DataCanvas(dc)
				gx := data.X(p.X.Norm(tc.thr)).Dots(img.DPI())
				if gx >= float64(x0)-1 && gx <= float64(x1)+1 {
					t.Errorf("threshold guide at x = %.1f px runs through the legend (x %d–%d px)", gx, x0, x1)
				}
			})
		}
	}
}

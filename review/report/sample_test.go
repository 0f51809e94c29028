package report

import (
	"image"
	"image/color"
	"math"
	"time"

	"dosecover/review/view"
)

// sampleInput is a hand-made report input of an invented phantom case; the
// numbers are arbitrary but self-consistent, so the layout can be checked
// without an analysis.
func sampleInput() *Input {
	var dvh, cov []CurvePoint
	for e := 0.0; e <= 4; e += 0.05 {
		d := math.Pow(10, e)
		// A smooth, falling DVH: fraction of volume >= d.
		f := 1 / (1 + math.Pow(d/900, 2.2))
		dvh = append(dvh, CurvePoint{X: d, Y: f, Low: nan(), High: nan()})
		cov = append(cov, CurvePoint{X: d, Y: f, Low: math.Max(0, f-0.03), High: math.Min(1, f+0.025)})
	}
	var rows []SonicationRow
	for n := 1; n <= 7; n++ {
		rows = append(rows, SonicationRow{
			Number: n, Label: "sonication " + string(rune('A'+n-1)), Frames: 12 + n,
			PeakC: 52 + float64(n)*0.7, PeakDose: 300 * float64(n), LethalML: 0.05 * float64(n),
			AddedCoverage: 0.13, OutsideML: 0.004 * float64(n%2), Flagged: n % 3,
		})
	}
	rows[4].Excluded = true
	return &Input{
		CaseLabel:  "Phantom case P-001",
		ScanDate:   "2026-03-14",
		ReviewDate: time.Date(2026, 11, 2, 9, 30, 0, 0, time.UTC),
		Reviewer:   "A. Reviewer",
		Facts: Facts{
			Model: "CEM43 (Sapareto & Dewey 1984)", DoseUnit: "CEM43 min",
			Threshold: 240, MarginMM: 3, TargetName: "Target",
			TargetVolumeML: 2.143, Covered: 0.934, CoveredLow: 0.911, CoveredHigh: 0.952,
			BandLabel: "5th-95th percentile, 200 trials", NotMonitored: 0.012, CoveredOfTarget: 0.923,
			LethalML: 2.61,
			D98:      61.5, D50: 2210, D2: 30500,
			Holes:           []Region{{VolumeML: 0.094, DepthMM: 2.2}, {VolumeML: 0.012, DepthMM: 0.8}},
			Outside:         []Region{{VolumeML: 0.031, DepthMM: 4.4}},
			OutsideMarginML: 0.031,
			Avoid:           []AvoidRow{{Name: "Nerve", LethalML: 0, MaxDose: 12.4}},
		},
		Panels: []Panel{
			{Title: "Largest target cross-section", Caption: "axial z = 12.0 mm", Image: samplePanel(0)},
			{Title: "Largest hole", Caption: "axial z = 9.0 mm", Image: samplePanel(1)},
			{Title: "Largest lethal cluster outside margin", Caption: "coronal y = -4.5 mm", Image: samplePanel(2)},
		},
		DVH: dvh, CoverageVsThreshold: cov, Wash: &Wash{Floor: 1, Ceiling: 1000},
		Sonications: rows,
		Quality: Quality{Frames: 112, Flagged: 4, MaxMotion: 0.012, MaxDriftC: 0.8, MinSNR: 41, Wraps: 3, Invalid: 57,
			Notes: []string{"frame 7 of sonication 3: motion 1.2 mm"}},
		Methods: []Setting{
			{"Dose model", "CEM43, R 0.5 above / 0.25 below 43 °C, rectangle rule"},
			{"PRF alpha", "-0.0100 ppm/°C"},
			{"B0 / TE", "3.00 T / 12.8 ms"},
			{"Drift correction", "polynomial order 1, automatic reference"},
			{"Baseline frames", "2"},
			{"Body temperature", "37.0 °C"},
			{"Uncertainty", "Monte Carlo, 200 trials, seed 1"},
			{"Excluded sonications", "5"},
		},
		InputsSHA256: "3f1c0a9e5b7d2c4f6a8e0b1d3c5e7f9a2b4c6d8e0f1a3b5c7d9e1f2a4b6c8d0e",
		Software:     "dosecover 0.1.0",
	}
}

// samplePanel draws a simple synthetic plane: a grey disc with the target
// outline and a lethal blob, enough to see the panel placement.
func samplePanel(kind int) *image.RGBA {
	const n = 160
	img := image.NewRGBA(image.Rect(0, 0, n, n))
	for y := 0; y < n; y++ {
		for x := 0; x < n; x++ {
			dx, dy := float64(x-n/2), float64(y-n/2)
			r := math.Hypot(dx, dy)
			g := uint8(20)
			if r < 70 {
				g = uint8(90 + 40*math.Cos(r/9))
			}
			c := color.RGBA{g, g, g, 255}
			bx, by := dx-float64(kind*6), dy+float64(kind*4)
			if math.Hypot(bx, by) < 26 {
				c = color.RGBA{uint8(min(255, int(g)+90)), uint8(g / 2), uint8(g / 3), 255}
			}
			if rr := math.Hypot(dx, dy); math.Abs(rr-28) < 1 {
				c = view.ColorTarget
			}
			if y < 16 && x < n/2 {
				c = color.RGBA{255, 255, 255, 255} // marks the top left: a flip shows
			}
			img.SetRGBA(x, y, c)
		}
	}
	return img
}

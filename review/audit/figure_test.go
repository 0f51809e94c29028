package audit

import (
	"bytes"
	"flag"
	"image"
	"image/png"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"dosecover/review/view"
)

var update = flag.Bool("update", false, "rewrite the golden images in testdata")

// figureRows returns 40 seeded cases: most analysed with coverage between
// 60 and 100 %, a few with lethal volume outside the margin, some
// incomplete or failed.
func figureRows() []Row {
	rng := rand.New(rand.NewPCG(2026, 12))
	var rows []Row
	for k := range 40 {
		m := NoMetrics()
		r := Row{Case: "c", Status: StatusOK}
		switch {
		case k%13 == 5:
			r.Status = StatusIncomplete
		case k%17 == 3:
			r.Status = StatusFailed
		default:
			m.CoveragePct = Num(60 + 40*rng.Float64())
			m.OutsideMarginML = Num(0)
			if rng.IntN(4) == 0 {
				m.OutsideMarginML = Num(2 * rng.Float64())
			}
		}
		if k == 39 {
			m.CoveragePct = 100 // the upper edge falls into the last bin
		}
		r.Metrics = m
		rows = append(rows, r)
	}
	return rows
}

// TestFigureGolden compares summary.png with the reviewed golden image
// (pixel for pixel; rendering is pure Go and deterministic). Run with
// -update to rewrite it after a deliberate change, then look at it.
func TestFigureGolden(t *testing.T) {
	var buf bytes.Buffer
	if err := WriteFigure(&buf, figureRows()); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(buf.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	if b := img.Bounds(); b.Dx() != 1000 || b.Dy() != 460 {
		t.Errorf("figure %v, want 1000x460 (10 x 4.6 in at 100 dpi)", b)
	}
	// The histogram bars are in the target colour, the points in the spill
	// colour of the palette.
	if countColor(img, view.ColorTarget) < 1000 {
		t.Errorf("few histogram pixels in the target colour")
	}
	if countColor(img, view.ColorSpill) < 20 {
		t.Errorf("few scatter pixels in the spill colour")
	}
	golden := filepath.Join("testdata", "summary.golden.png")
	if *update {
		if err := os.WriteFile(golden, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	wimg, err := png.Decode(bytes.NewReader(want))
	if err != nil {
		t.Fatal(err)
	}
	if d := diffPixels(img, wimg); d != 0 {
		os.WriteFile(filepath.Join(t.TempDir(), "summary.png"), buf.Bytes(), 0o644)
		t.Errorf("summary figure differs from %s in %d pixels", golden, d)
	}
}

func TestFigureEmpty(t *testing.T) {
	var buf bytes.Buffer
	if err := WriteFigure(&buf, []Row{{Case: "x", Status: StatusFailed, Metrics: NoMetrics()}}); err != nil {
		t.Fatal(err)
	}
	if _, err := png.Decode(&buf); err != nil {
		t.Fatal(err)
	}
}

func countColor(img image.Image, c interface{ RGBA() (r, g, b, a uint32) }) int {
	cr, cg, cb, _ := c.RGBA()
	n := 0
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bb, _ := img.At(x, y).RGBA()
			if r>>8 == cr>>8 && g>>8 == cg>>8 && bb>>8 == cb>>8 {
				n++
			}
		}
	}
	return n
}

func diffPixels(a, b image.Image) int {
	if a.Bounds() != b.Bounds() {
		return a.Bounds().Dx() * a.Bounds().Dy()
	}
	n := 0
	r := a.Bounds()
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			ar, ag, ab, aa := a.At(x, y).RGBA()
			br, bg, bb, ba := b.At(x, y).RGBA()
			if ar != br || ag != bg || ab != bb || aa != ba {
				n++
			}
		}
	}
	return n
}

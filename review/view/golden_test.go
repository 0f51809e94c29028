package view

import (
	"flag"
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"sync"
	"testing"

	"dosecover/dosemap"
)

var update = flag.Bool("update", false, "rewrite the golden images in testdata/golden")

var (
	phOnce sync.Once
	ph     *phantom
)

func testPhantom() *phantom {
	phOnce.Do(func() { ph = newPhantom() })
	return ph
}

// goldenCase is one rendered picture of the phantom.
type goldenCase struct {
	name   string
	render func(t *testing.T) image.Image
}

func goldenCases() []goldenCase {
	ph := testPhantom()
	ga := ph.anatomy.Geometry
	centre := dosemap.Vec3{0, 0, 0}
	return []goldenCase{
		{"axial", func(t *testing.T) image.Image {
			p := AcquisitionPlane(ga, 20) // z = 0
			s := ph.scene(p)
			s.Caption = "Phantom A · axial · z = 0.0 mm"
			return mustRender(t, s, FitView(p, 512, 512))
		}},
		{"axial_zoom", func(t *testing.T) image.Image {
			p := AcquisitionPlane(ga, 20)
			s := ph.scene(p)
			s.Isodoses = []float64{30, 1000}
			v := FitView(p, 512, 512)
			cx, cy := v.ToDisplay(p, func() Point { x, y := p.Pixel(centre); return Point{x, y} }())
			v = v.ZoomAt(p, cx, cy, 3.5)
			v = v.Pan(p, -60, 0)
			s.Caption = "Phantom A · axial · z = 0.0 mm · zoom 3.5×\nisodoses 30, 240, 1000 CEM43"
			return mustRender(t, s, v)
		}},
		{"coronal", func(t *testing.T) image.Image {
			p := PlaneThrough(ga, RowNormal, centre, 0)
			s := ph.scene(p)
			s.Caption = "Phantom A · coronal · y = 0.0 mm"
			return mustRender(t, s, FitView(p, 512, 320))
		}},
		{"oblique", func(t *testing.T) image.Image {
			// Tilted 30° from axial about the patient's left-right axis.
			a := 30 * math.Pi / 180
			p, err := ObliquePlane(ga, dosemap.Vec3{0, 0, 2}, dosemap.Vec3{1, 0, 0},
				dosemap.Vec3{0, math.Cos(a), math.Sin(a)}, 1)
			if err != nil {
				t.Fatal(err)
			}
			s := ph.scene(p)
			s.Caption = "Phantom A · oblique 30°"
			return mustRender(t, s, FitView(p, 448, 448))
		}},
		{"traces_axial", func(t *testing.T) image.Image {
			// Measured planes of three sonications on the axial view at
			// z = 0: a coronal plane through y = -6 (edge-on: a band),
			// the selected sonication's sagittal plane through x = 4
			// (emphasised, numbered) and a three-slice axial slab around
			// z = 0 seen face-on (its field of view).
			p := AcquisitionPlane(ga, 20)
			s := ph.scene(p)
			s.Measured = tracePhantomStacks()
			s.Caption = "Phantom A · axial · z = 0.0 mm · measured planes"
			return mustRender(t, s, FitView(p, 512, 512))
		}},
		{"traces_coronal", func(t *testing.T) image.Image {
			// The same planes on the coronal view at y = 0: the axial slab
			// edge-on (three slice lines in a band), the sagittal plane
			// edge-on, the coronal plane (y = -6) missed.
			p := PlaneThrough(ga, RowNormal, centre, 0)
			s := ph.scene(p)
			s.Measured = tracePhantomStacks()
			s.Caption = "Phantom A · coronal · y = 0.0 mm · measured planes"
			return mustRender(t, s, FitView(p, 512, 320))
		}},
		{"traces_face_on", func(t *testing.T) image.Image {
			// The axial slab's sonication selected: the axial view at
			// z = 0 lies inside its slab and says it shows its measured
			// plane; its field of view outlined dashed.
			p := AcquisitionPlane(ga, 20)
			s := ph.scene(p)
			s.Measured = tracePhantomStacks()
			for n := range s.Measured {
				s.Measured[n].Emphasis = s.Measured[n].Sonication == 3
			}
			return mustRender(t, s, FitView(p, 320, 320))
		}},
		{"colorbar", func(t *testing.T) image.Image {
			img, err := ColorBar(DefaultDoseScale(), phLethal, 120, 360)
			if err != nil {
				t.Fatal(err)
			}
			return img
		}},
		{"key", func(t *testing.T) image.Image { return OverlayKey(DefaultStyle(), 260) }},
		{"washbar", func(t *testing.T) image.Image {
			// The shared colour bar for the common 240 CEM43 threshold.
			img, err := WashBar(WashScale(240), 240, "CEM43 min", 420, 64)
			if err != nil {
				t.Fatal(err)
			}
			return img
		}},
	}
}

// tracePhantomStacks are measured stacks around the phantom's target: a
// coronal plane (sonication 1), a sagittal plane (sonication 2, selected)
// and an axial slab of three 3 mm slices (sonication 3), each 64 × 64
// pixels of 1.25 mm.
func tracePhantomStacks() []MeasuredStack {
	const n, px = 64, 1.25
	h := float64(n-1) / 2 * px
	return []MeasuredStack{
		{Sonication: 1, Geometry: stackFromDICOM([6]float64{1, 0, 0, 0, 0, -1}, [3]float64{-h, -6, h}, n, n, [2]float64{px, px}, 1, 3)},
		{Sonication: 2, Emphasis: true, Geometry: stackFromDICOM([6]float64{0, 1, 0, 0, 0, -1}, [3]float64{4, -h, h}, n, n, [2]float64{px, px}, 1, 3)},
		{Sonication: 3, Geometry: stackFromDICOM([6]float64{1, 0, 0, 0, 1, 0}, [3]float64{-h, -h, -3}, n, n, [2]float64{px, px}, 3, 3)},
	}
}

func mustRender(t *testing.T, s *Scene, v View) image.Image {
	t.Helper()
	img, err := Render(s, v)
	if err != nil {
		t.Fatal(err)
	}
	return img
}

// TestGolden compares the rendered phantom scenes with the stored images
// in testdata/golden (go test -run Golden -update rewrites them). A pixel
// may differ by up to 8 levels per channel (anti-aliasing rounding across
// platforms); at most 0.2 % of the pixels may differ by more.
func TestGolden(t *testing.T) {
	for _, c := range goldenCases() {
		t.Run(c.name, func(t *testing.T) {
			got := c.render(t)
			path := filepath.Join("testdata", "golden", c.name+".png")
			if *update {
				if err := writePNG(path, got); err != nil {
					t.Fatal(err)
				}
				return
			}
			f, err := os.Open(path)
			if err != nil {
				t.Fatalf("reading golden image: %v (run go test -run Golden -update)", err)
			}
			defer f.Close()
			want, err := png.Decode(f)
			if err != nil {
				t.Fatalf("decoding %s: %v", path, err)
			}
			if err := compareImages(got, want, 8, 0.002); err != nil {
				_ = writePNG(filepath.Join(t.TempDir(), c.name+".png"), got)
				t.Errorf("%s: %v", path, err)
			}
		})
	}
}

func writePNG(path string, img image.Image) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	if err := png.Encode(f, img); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// compareImages reports whether got and want differ in size or in more
// than frac of their pixels by more than tol levels in a channel.
func compareImages(got, want image.Image, tol int, frac float64) error {
	if got.Bounds().Size() != want.Bounds().Size() {
		return fmt.Errorf("size %v, golden %v", got.Bounds().Size(), want.Bounds().Size())
	}
	b := got.Bounds()
	wb := want.Bounds()
	bad, worst := 0, 0
	for y := 0; y < b.Dy(); y++ {
		for x := 0; x < b.Dx(); x++ {
			r1, g1, b1, a1 := got.At(b.Min.X+x, b.Min.Y+y).RGBA()
			r2, g2, b2, a2 := want.At(wb.Min.X+x, wb.Min.Y+y).RGBA()
			d := 0
			for _, p := range [][2]uint32{{r1, r2}, {g1, g2}, {b1, b2}, {a1, a2}} {
				dd := int(p[0]>>8) - int(p[1]>>8)
				if dd < 0 {
					dd = -dd
				}
				d = max(d, dd)
			}
			worst = max(worst, d)
			if d > tol {
				bad++
			}
		}
	}
	if n := b.Dx() * b.Dy(); float64(bad) > frac*float64(n) {
		return fmt.Errorf("%d of %d pixels differ by more than %d levels (worst %d)", bad, n, tol, worst)
	}
	return nil
}

// TestCompareImagesDetectsChange guards the golden comparison itself: a
// changed block of pixels must be reported.
func TestCompareImagesDetectsChange(t *testing.T) {
	a := image.NewRGBA(image.Rect(0, 0, 50, 50))
	b := image.NewRGBA(image.Rect(0, 0, 50, 50))
	if err := compareImages(a, b, 8, 0.002); err != nil {
		t.Fatalf("identical images reported different: %v", err)
	}
	for y := 10; y < 13; y++ {
		for x := 10; x < 13; x++ {
			b.Pix[b.PixOffset(x, y)] = 200
		}
	}
	if compareImages(a, b, 8, 0.002) == nil {
		t.Error("9 changed pixels of 2500 not reported")
	}
}

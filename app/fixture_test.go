//go:build cgo

package main

import (
	"context"
	"flag"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/review"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/test"
)

var update = flag.Bool("update", false, "rewrite the golden images in testdata/")

// syntheticCase is a small invented phantom for the window tests: a
// spherical target of radius 10 mm at the origin, drawn as circles on the
// anatomy slices, and three ready-made dose maps (CEM43, Gaussian blobs of
// peak 3000). Sonications 1 and 2 cover the left and right halves of the
// target; sonication 3 lands 16 mm posterior, beyond the 3 mm margin.
func syntheticCase() *loadedCase {
	ag := dosemap.NewAxialGeometry(80, 80, 15, dosemap.Vec3{1, 1, 2}, dosemap.Vec3{-39.5, -39.5, -14})
	an := dosemap.NewVolume(ag)
	for n := range an.Data {
		i, j, k := ag.IJK(n)
		p := ag.Point(float64(i), float64(j), float64(k))
		if math.Hypot(p[0], p[1]*1.15) < 34 {
			an.Data[n] = float32(500 + 150*math.Cos(p[0]/6)*math.Sin(p[1]/7))
		}
	}
	target := dosemap.Structure{Number: 1, Name: "PTV phantom", Role: dosemap.RoleTarget}
	for k := 0; k < ag.Slices; k++ {
		z := ag.Point(0, 0, float64(k))[2]
		if math.Abs(z) >= 10 {
			continue
		}
		r := math.Sqrt(100 - z*z)
		var c dosemap.Contour
		for a := 0; a < 48; a++ {
			t := 2 * math.Pi * float64(a) / 48
			c.Points = append(c.Points, dosemap.Vec3{r * math.Cos(t), r * math.Sin(t), z})
		}
		target.Contours = append(target.Contours, c)
	}
	tg := dosemap.NewAxialGeometry(30, 30, 10, dosemap.Vec3{2, 2, 3}, dosemap.Vec3{-29, -29, -13.5})
	blob := func(c dosemap.Vec3, sigma float64) []float32 {
		d := make([]float32, tg.Len())
		for n := range d {
			i, j, k := tg.IJK(n)
			q := tg.Point(float64(i), float64(j), float64(k)).Sub(c)
			d[n] = float32(3000 * math.Exp(-q.Dot(q)/(2*sigma*sigma)))
		}
		return d
	}
	c := &dosemap.Case{Label: "Synthetic phantom", Anatomy: an, WindowCenter: 500, WindowWidth: 500,
		Patient:    dosemap.Patient{Name: "PHANTOM^TEST", ID: "T-0001"},
		Structures: []dosemap.Structure{target}}
	start := time.Date(2026, 1, 2, 10, 0, 0, 0, time.UTC)
	for n, b := range []struct {
		c     dosemap.Vec3
		sigma float64
	}{{dosemap.Vec3{-5, 0, 0}, 5}, {dosemap.Vec3{5, 0, 0}, 5}, {dosemap.Vec3{0, 16, 0}, 2.5}} {
		c.Sonications = append(c.Sonications, &dosemap.Sonication{Number: n + 1, Label: "dose map", Geometry: tg,
			Start: start.Add(time.Duration(90*n) * time.Second), Dose: blob(b.c, b.sigma)})
	}
	return &loadedCase{Dir: os.TempDir(), Case: c, Skipped: []skippedFile{{"notes.txt", "not a DICOM file (no DICM marker)"}}}
}

// benchWindow is testWindow with the synthetic case open, for benchmarks.
func benchWindow(b *testing.B) *reviewWindow {
	b.Helper()
	dir := b.TempDir()
	old := reviewsDir
	reviewsDir = func() (string, error) { return dir, nil }
	b.Cleanup(func() { reviewsDir = old })
	a := test.NewTempApp(b)
	rw := newReviewWindow(a)
	b.Cleanup(rw.win.Close)
	mark := rw.completed.Load()
	lc := syntheticCase()
	lc.Dir = b.TempDir()
	rw.caseLoaded(lc, "5e11f0c0ffee5e11f0c0ffee5e11f0c0ffee5e11f0c0ffee5e11f0c0ffee5e11", 4, nil, review.DefaultSettings())
	for rw.completed.Load() < mark+1 {
		time.Sleep(5 * time.Millisecond)
	}
	if rw.result == nil {
		b.Fatalf("no analysis: %s", rw.status.Text)
	}
	return rw
}

// testWindow returns a review window of the test app with the review
// records kept in a temporary folder.
func testWindow(t *testing.T) *reviewWindow {
	t.Helper()
	dir := t.TempDir()
	old := reviewsDir
	reviewsDir = func() (string, error) { return dir, nil }
	t.Cleanup(func() { reviewsDir = old })
	a := test.NewTempApp(t)
	rw := newReviewWindow(a)
	rw.win.Resize(fyne.NewSize(1560, 940))
	t.Cleanup(rw.win.Close)
	return rw
}

// waitJobs waits until n background jobs have finished since mark.
func waitJobs(t *testing.T, rw *reviewWindow, mark int64, n int64) {
	t.Helper()
	deadline := time.Now().Add(60 * time.Second)
	for rw.completed.Load() < mark+n {
		if time.Now().After(deadline) {
			t.Fatalf("background work did not finish (status: %s)", rw.status.Text)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// openSynthetic shows the synthetic case and waits for its analysis.
func openSynthetic(t *testing.T, rw *reviewWindow) {
	t.Helper()
	mark := rw.completed.Load()
	lc := syntheticCase()
	lc.Dir = t.TempDir()
	rw.caseLoaded(lc, "5e11f0c0ffee5e11f0c0ffee5e11f0c0ffee5e11f0c0ffee5e11f0c0ffee5e11", 4, nil, review.DefaultSettings())
	waitJobs(t, rw, mark, 1)
	if rw.result == nil {
		t.Fatalf("no analysis result; status: %s", rw.status.Text)
	}
}

// writePNG writes img to path.
func writePNG(t *testing.T, path string, img image.Image) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := png.Encode(f, img); err != nil {
		t.Fatal(err)
	}
}

// TestPreviewLayout writes the whole window, drawn by the software
// renderer, to $DOSECOVER_PREVIEW (a PNG path), for looking at the layout.
func TestPreviewLayout(t *testing.T) {
	out := os.Getenv("DOSECOVER_PREVIEW")
	if out == "" {
		t.Skip("set DOSECOVER_PREVIEW=/path/file.png to draw the layout preview")
	}
	rw := testWindow(t)
	openSynthetic(t, rw)
	if len(rw.result.HoleRows) > 0 {
		rw.jumpTo(rw.result.HoleRows[0])
	}
	rw.pin(dosemap.Vec3{0, 0, 0})
	writePNG(t, out, rw.win.Canvas().Capture())
	rw.showAbout()
	writePNG(t, strings.TrimSuffix(out, ".png")+"-about.png", rw.win.Canvas().Capture())
	for _, o := range rw.win.Canvas().Overlays().List() {
		rw.win.Canvas().Overlays().Remove(o)
	}
	rw.showShortcuts()
	writePNG(t, strings.TrimSuffix(out, ".png")+"-keys.png", rw.win.Canvas().Capture())
	for _, o := range rw.win.Canvas().Overlays().List() {
		rw.win.Canvas().Overlays().Remove(o)
	}
	rw.openSettings()
	writePNG(t, strings.TrimSuffix(out, ".png")+"-settings.png", rw.win.Canvas().Capture())
	_ = context.Background
}

var testTime = time.Date(2026, 5, 6, 7, 8, 9, 0, time.UTC)

//go:build cgo

package main

import (
	"context"
	"image/png"
	"math"
	"os"
	"testing"
	"time"

	"dosecover/dosemap"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/test"
)

// previewSession is a hand-made layout fixture: a sphere phantom with three
// Gaussian dose blobs. It exercises the window's drawing only; it is not an
// analysis and is never compiled into the program.
type previewSession struct {
	c    *dosemap.Case
	dose []*dosemap.Volume
}

func previewCase() *loadedCase {
	g := dosemap.NewAxialGeometry(96, 96, 24, dosemap.Vec3{1.5, 1.5, 3}, dosemap.Vec3{-71.25, -71.25, -34.5})
	an := dosemap.NewVolume(g)
	for n := range an.Data {
		i, j, k := g.IJK(n)
		p := g.Point(float64(i), float64(j), float64(k))
		r := math.Hypot(p[0], p[1]*1.2)
		if r < 60 {
			an.Data[n] = float32(600 + 200*math.Cos(p[0]/9)*math.Sin(p[1]/11) + 80*math.Cos(p[2]/7))
		}
	}
	c := &dosemap.Case{Label: "Preview phantom", Anatomy: an, WindowCenter: 600, WindowWidth: 900}
	for n := 1; n <= 3; n++ {
		c.Sonications = append(c.Sonications, &dosemap.Sonication{Number: n, Label: "sonication", Geometry: g})
	}
	return &loadedCase{Dir: os.TempDir(), Case: c, Skipped: []skippedFile{{"notes.txt", "not a DICOM file (no DICM marker)"}}}
}

func (ps *previewSession) Analyze(_ context.Context, s analysisSettings) (*analysisResult, error) {
	g := ps.c.Anatomy.Geometry
	ex := s.excludedSet()
	sum := dosemap.NewVolume(g)
	target := dosemap.NewVolume(g)
	margin := dosemap.NewVolume(g)
	centres := []dosemap.Vec3{{-6, 0, 0}, {6, 0, 0}, {0, 8, 3}}
	for n := range sum.Data {
		i, j, k := g.IJK(n)
		p := g.Point(float64(i), float64(j), float64(k))
		if p.Norm() < 12 {
			target.Data[n] = 1
		}
		if p.Norm() < 17 {
			margin.Data[n] = 1
		}
		for m, cc := range centres {
			if ex[m+1] {
				continue
			}
			d := p.Sub(cc).Norm()
			sum.Data[n] += float32(3000 * math.Exp(-d*d/50))
		}
	}
	var tot, cov float64
	for n := range target.Data {
		if target.Data[n] > 0 {
			tot++
			if float64(sum.Data[n]) >= s.Threshold {
				cov++
			}
		}
	}
	r := &analysisResult{Threshold: s.Threshold, Unit: "CEM43 min", MarginMM: s.MarginMM, Dose: sum,
		Target: target, Margin: margin, Covered: cov / tot, CoveredP05: math.NaN(), CoveredP95: math.NaN(),
		TargetML: tot * g.VoxelVolume() / 1000}
	for m := range centres {
		r.Sonications = append(r.Sonications, sonicationRow{Number: m + 1, Label: "fixture", Offset: float64(60 * m), PeakTemp: math.NaN(), DoseAddedML: math.NaN(), CoverageAdded: math.NaN()})
	}
	r.Holes = []region{{Label: "H1", VolumeML: 0.1, Centre: dosemap.Vec3{0, -9, -6}}}
	return r, nil
}

func (ps *previewSession) Probe(p dosemap.Vec3, s analysisSettings) (*probeCurve, error) {
	return nil, errMissingPart
}

// TestPreviewLayout writes the window drawn by the software renderer to
// $DOSECOVER_PREVIEW (a PNG path) for looking at the layout.
func TestPreviewLayout(t *testing.T) {
	out := os.Getenv("DOSECOVER_PREVIEW")
	if out == "" {
		t.Skip("set DOSECOVER_PREVIEW=/path/file.png to draw the layout preview")
	}
	reviewsDir = func() (string, error) { return t.TempDir(), nil }
	a := test.NewTempApp(t)
	rw := newReviewWindow(a)
	tw := rw.win
	defer tw.Close()
	tw.Resize(fyne.NewSize(1560, 940))
	lc := previewCase()
	rw.loaded = lc
	rw.caseLoaded(lc, "0123456789abcdef0123456789abcdef", 3, nil, defaultSettings())
	sess := &previewSession{c: lc.Case}
	res, _ := sess.Analyze(context.Background(), rw.settings)
	rw.sess = sess
	rw.showResult(res)
	time.Sleep(100 * time.Millisecond)
	t.Logf("viewer %v table %v notice %v", rw.viewers[0].Size(), rw.sonTable.Size(), rw.notice.MinSize())
	img := tw.Canvas().Capture()
	f, err := os.Create(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := png.Encode(f, img); err != nil {
		t.Fatal(err)
	}
}

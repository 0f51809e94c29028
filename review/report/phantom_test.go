package report

import (
	"context"
	"math"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/review"
)

// phantomCase is an invented phantom: a grey cylinder of anatomy, a round
// target 14 mm across on five slices, an avoid structure beside it, and two
// ready dose-map sonications: one ablating most of the target with a cold
// spot (a hole) and one small hot spot outside the margin (a spill).
func phantomCase() *dosemap.Case {
	g := dosemap.NewAxialGeometry(48, 48, 7, dosemap.Vec3{1, 1, 2.5}, dosemap.Vec3{-23.5, -23.5, -7.5})
	anat := dosemap.NewVolume(dosemap.NewAxialGeometry(96, 96, 7, dosemap.Vec3{0.5, 0.5, 2.5}, dosemap.Vec3{-23.75, -23.75, -7.5}))
	for n := range anat.Data {
		i, j, k := anat.IJK(n)
		p := anat.Point(float64(i), float64(j), float64(k))
		r := math.Hypot(p[0], p[1])
		if r < 22 {
			anat.Data[n] = float32(400 + 120*math.Cos(r/3))
		}
	}
	dose1 := make([]float32, g.Len())
	dose2 := make([]float32, g.Len())
	for n := range dose1 {
		i, j, k := g.IJK(n)
		p := g.Point(float64(i), float64(j), float64(k))
		r := p.Sub(dosemap.Vec3{0.5, 0, 0}).Norm()
		d := 240 * math.Exp((8.5-r)/1.6)
		// A cold spot near the target edge.
		if c := p.Sub(dosemap.Vec3{-4, 3.5, 0}).Norm(); c < 3 {
			d *= 0.05
		}
		dose1[n] = float32(math.Min(d, 1e5))
		s := p.Sub(dosemap.Vec3{13.5, -9, 0}).Norm()
		dose2[n] = float32(math.Min(240*math.Exp((2.5-s)/1.2), 1e5))
	}
	circle := func(cx, cy, r, z float64) dosemap.Contour {
		var pts []dosemap.Vec3
		for a := 0; a < 48; a++ {
			t := 2 * math.Pi * float64(a) / 48
			pts = append(pts, dosemap.Vec3{cx + r*math.Cos(t), cy + r*math.Sin(t), z})
		}
		return dosemap.Contour{Points: pts}
	}
	target := dosemap.Structure{Number: 1, Name: "Target", Role: dosemap.RoleTarget}
	avoid := dosemap.Structure{Number: 2, Name: "Nerve", Role: dosemap.RoleAvoid}
	for z := -5.0; z <= 5; z += 2.5 {
		target.Contours = append(target.Contours, circle(0, 0, 7-math.Abs(z)/3, z))
		avoid.Contours = append(avoid.Contours, circle(-15, -10, 2.5, z))
	}
	start := time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC)
	return &dosemap.Case{
		Label:   "phantom P-002",
		Patient: dosemap.Patient{StudyDate: "20260314"},
		Anatomy: anat, WindowCenter: 400, WindowWidth: 500,
		Sonications: []*dosemap.Sonication{
			{Number: 1, Label: "sonication 1", Geometry: g, Dose: dose1, Start: start},
			{Number: 2, Label: "sonication 2", Geometry: g, Dose: dose2, Start: start.Add(3 * time.Minute)},
		},
		Structures: []dosemap.Structure{target, avoid},
	}
}

func phantomInput(t testing.TB, deid bool) (*dosemap.Case, *review.Result, *Input) {
	t.Helper()
	c := phantomCase()
	set := review.DefaultSettings()
	set.MarginMM = 3
	set.Trials = 0
	r, err := review.Analyze(context.Background(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	in, err := FromResult(c, r, Options{
		Deidentify: deid, Reviewer: "Q. Reviewer", ReviewDate: time.Date(2026, 11, 2, 9, 30, 0, 0, time.UTC),
		InputsSHA256: "00112233445566778899aabbccddeeff00112233445566778899aabbccddeeff", PanelPixels: 360,
	})
	if err != nil {
		t.Fatal(err)
	}
	return c, r, in
}

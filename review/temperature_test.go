package review

import (
	"context"
	"math"
	"slices"
	"testing"

	"dosecover/dosemap"
)

// TestSessionTemperature: the series the session keeps is the one the
// engine computes from the same sonication and options (frame by frame,
// bit for bit), its hottest valid voxel is the 57 °C of the heated ball
// put into the phase (within 4 noise sigmas of σ = 0.275 °C at SNR 50 plus
// the expected maximum of the draws, testdata/check-values.md), and there is none
// for a ready dose map, a sonication on another grid or an unknown number.
func TestSessionTemperature(t *testing.T) {
	g := thermoGrid(32, 32, 6)
	hot := func(p dosemap.Vec3) float64 {
		if p.Norm() < 9 {
			return 57
		}
		return 37
	}
	heated := heatedSonication(1, g, 8, 2, hot, 50, 3)
	doseOnly := &dosemap.Sonication{Number: 2, Label: "dose map", Geometry: g, Dose: make([]float32, g.Len())}
	g2 := thermoGrid(24, 24, 6)
	other := heatedSonication(3, g2, 8, 2, hot, 50, 4)
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{heated, doseOnly, other},
		Structures:  []dosemap.Structure{sphereStructure("target", dosemap.Vec3{}, 5, 1.5, 0, 64, dosemap.RoleTarget)},
	}
	set := DefaultSettings()
	set.Trials = 0
	ses, err := Prepare(context.Background(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	want, err := dosemap.Thermometry(heated, dosemap.DefaultThermometryOptions())
	if err != nil {
		t.Fatal(err)
	}
	got := ses.Temperature(1)
	if got == nil {
		t.Fatal("no series kept for sonication 1")
	}
	if !got.Geometry.SameGrid(ses.ThermometryGrid(), 1e-9) {
		t.Errorf("series grid %v, want the thermometry grid %v", got.Geometry, ses.ThermometryGrid())
	}
	if !slices.Equal(got.Times, want.Times) || len(got.Frames) != len(want.Frames) {
		t.Fatalf("times %v frames %d, want %v and %d", got.Times, len(got.Frames), want.Times, len(want.Frames))
	}
	peak := math.Inf(-1)
	for f := range want.Frames {
		for v, x := range want.Frames[f] {
			y := got.Frames[f][v]
			if x != y && !(x != x && y != y) {
				t.Fatalf("frame %d voxel %d: %v, engine %v", f, v, y, x)
			}
			if y == y {
				peak = math.Max(peak, float64(y))
			}
		}
	}
	if math.Abs(peak-57) > 4*0.275+0.8 {
		t.Errorf("hottest voxel %.2f °C, want 57", peak)
	}
	for _, n := range []int{2, 3, 99} {
		if ts := ses.Temperature(n); ts != nil {
			t.Errorf("sonication %d: series kept, want nil", n)
		}
	}
}

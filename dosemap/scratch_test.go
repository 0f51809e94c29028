package dosemap

import (
	"testing"
)

// TestScratchReuse runs Thermometry and the dose on two series of
// different sizes in turn (so the second and third runs get buffers a
// previous run used and left dirty) and checks that a repeated run gives
// the same temperatures, noise, quality and dose, value for value, as the
// first; the first run is checked against the phantom's truth elsewhere
// (TestThermometryDriftRemoval and friends).
func TestScratchReuse(t *testing.T) {
	type run struct {
		ts *TemperatureSeries
		d  *DoseMap
	}
	do := func(s *Sonication) run {
		ts, err := Thermometry(s, DefaultThermometryOptions())
		if err != nil {
			t.Fatal(err)
		}
		return run{ts, CEM43{}.Dose(ts)}
	}
	pa := newPhantom(24, 9)
	pa.snr, pa.rise = 40, hotSpot(12, 3, 3)
	a := pa.sonication(true)
	pb := newPhantom(40, 12)
	pb.snr, pb.rise, pb.seed = 25, hotSpot(20, 4, 2), 7
	b := pb.sonication(true)
	pc := newPhantom(24, 9)
	pc.snr = 10
	c := pc.sonication(false) // phase only: other buffers
	first := do(a)
	checkHottest(t, first.ts)
	checkHottest(t, do(b).ts)
	do(c)
	again := do(a)
	same := func(what string, x, y []float32) {
		t.Helper()
		if len(x) != len(y) {
			t.Fatalf("%s: %d and %d values", what, len(x), len(y))
		}
		for n := range x {
			if x[n] != y[n] && !(x[n] != x[n] && y[n] != y[n]) {
				t.Fatalf("%s: voxel %d is %g, was %g", what, n, y[n], x[n])
			}
		}
	}
	for f := range first.ts.Frames {
		same("temperature", first.ts.Frames[f], again.ts.Frames[f])
		if first.ts.Quality[f] != again.ts.Quality[f] {
			t.Errorf("frame %d quality %+v, was %+v", f, again.ts.Quality[f], first.ts.Quality[f])
		}
	}
	same("sigma", first.ts.Sigma, again.ts.Sigma)
	same("dose", first.d.Data, again.d.Data)
}

// TestReleaseReusesFrames: a released series' frame storage serves the next
// series of that size, whose every value is then its own (equal to the
// same series computed into fresh memory), and the released series holds
// no frames any more.
func TestReleaseReusesFrames(t *testing.T) {
	pa := newPhantom(24, 9)
	pa.snr, pa.rise = 40, hotSpot(12, 3, 3)
	pb := newPhantom(24, 9)
	pb.snr, pb.rise, pb.seed = 20, hotSpot(25, 2, 2), 3
	b := pb.sonication(true)
	fresh, err := Thermometry(b, DefaultThermometryOptions())
	if err != nil {
		t.Fatal(err)
	}
	for round := 0; round < 3; round++ {
		a, err := Thermometry(pa.sonication(round != 1), DefaultThermometryOptions())
		if err != nil {
			t.Fatal(err)
		}
		// Scribble over a's frames, then hand them back.
		for _, fr := range a.Frames {
			for n := range fr {
				fr[n] = 1234
			}
		}
		a.Release()
		if a.Frames != nil {
			t.Fatal("a released series keeps its frames")
		}
		again, err := Thermometry(b, DefaultThermometryOptions())
		if err != nil {
			t.Fatal(err)
		}
		for f := range fresh.Frames {
			for n, x := range fresh.Frames[f] {
				if y := again.Frames[f][n]; x != y && !(x != x && y != y) {
					t.Fatalf("round %d frame %d voxel %d: %g, computed into fresh memory %g", round, f, n, y, x)
				}
			}
		}
		again.Release()
	}
}

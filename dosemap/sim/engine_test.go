package sim

import (
	"context"
	"math"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
)

// dosecover's own thermometry, run on the written files of a simulated
// session, recovers the simulated temperature rise: at the 20 hottest
// voxels of each sonication's hottest frame, the mean error stays within
// 0.5 °C and each voxel within 2 °C (noise √2/SNR ≈ 0.28 °C at SNR 50
// (testdata/check-values.md), plus the residual of the first-order drift fit). The
// motion frame of the demo is flagged.
func TestThermometryRecoversSimulation(t *testing.T) {
	dir := t.TempDir()
	s := smallSession()
	s.Motion = []Motion{{Sonication: 2, Frame: 6, Shift: dosemap.Vec3{3, 1.5, 0}}}
	res, err := s.simulate()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := WriteSession(dir, s); err != nil {
		t.Fatal(err)
	}
	c, _, err := dicomio.Load(context.Background(), dir, dicomio.LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Sonications) != len(s.Sonications) {
		t.Fatalf("%d sonications read", len(c.Sonications))
	}
	for n, so := range c.Sonications {
		ts, err := dosemap.Thermometry(so, dosemap.DefaultThermometryOptions())
		if err != nil {
			t.Fatal(err)
		}
		frames := res.frames[n]
		hot := 0
		for f := range frames {
			if n == 1 && f == 5 {
				continue // the moved frame
			}
			if maxOf(frames[f]) > maxOf(frames[hot]) {
				hot = f
			}
		}
		// Hottest 20 voxels of that frame.
		top := topN(frames[hot], 20)
		var sum float64
		for _, v := range top {
			// The engine reports absolute temperature from the body
			// temperature plus the change since the baseline frames.
			base := (frames[0][v] + frames[1][v]) / 2
			want := 37 + float64(frames[hot][v]-base)
			got := float64(ts.Frames[hot][v])
			if math.IsNaN(got) || math.Abs(got-want) > 2 {
				t.Errorf("sonication %d frame %d voxel %d: engine %.2f °C, simulation %.2f °C", n+1, hot+1, v, got, want)
			}
			sum += got - want
		}
		t.Logf("sonication %d frame %d: mean error %.3f °C, peak rise %.1f °C", n+1, hot+1, sum/20, maxOf(frames[hot]))
		if mean := sum / 20; math.Abs(mean) > 0.5 {
			t.Errorf("sonication %d: mean error %.2f °C at the hottest voxels", n+1, mean)
		}
		if n == 1 && !ts.Quality[5].Flagged {
			t.Errorf("moved frame not flagged: %+v", ts.Quality[5])
		}
	}
}

func topN(x []float32, n int) []int {
	var out []int
	used := map[int]bool{}
	for len(out) < n {
		best := -1
		for v, val := range x {
			if !used[v] && (best < 0 || val > x[best]) {
				best = v
			}
		}
		used[best] = true
		out = append(out, best)
	}
	return out
}

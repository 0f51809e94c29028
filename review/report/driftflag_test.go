package report

import (
	"testing"

	"dosecover/review"
)

// TestDriftFlagInReport: a sonication whose removed drift exceeds the
// limit of the analysis' settings (drift_flag_c; review.DefaultDriftFlagC,
// 1 °C, when a result read back has none) is flagged in the sonication rows and listed in the quality summary.
func TestDriftFlagInReport(t *testing.T) {
	c, r, _ := phantomInput(t, false)
	// The phantom holds ready dose maps: give sonication 2 a drift.
	r.Quality = []review.SonicationQuality{{Sonication: r.Sonications[1].Number, MaxDriftC: -1.3}}
	for _, tc := range []struct {
		limit float64
		want  bool
	}{{0, true}, {1.5, false}} {
		r.Settings.DriftFlagC = tc.limit
		in, err := FromResult(c, r, Options{})
		if err != nil {
			t.Fatal(err)
		}
		if got := in.Sonications[1].DriftFlagged; got != tc.want || in.Sonications[0].DriftFlagged {
			t.Errorf("limit %g: sonication 2 flagged %v (want %v), sonication 1 %v", tc.limit, got, tc.want, in.Sonications[0].DriftFlagged)
		}
		if got := len(in.Quality.DriftFlagged) == 1; got != tc.want {
			t.Errorf("limit %g: quality lists %v", tc.limit, in.Quality.DriftFlagged)
		}
	}
	if s := driftList([]int{3, 5}); s != "sonications 3, 5" {
		t.Errorf("driftList: %q", s)
	}
}

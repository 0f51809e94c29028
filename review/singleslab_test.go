package review_test

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	"dosecover/dosemap/sim"
	"dosecover/review"
)

// TestSingleSlabFiguresUnchanged analyses sessions measured on one shared
// slab (every sonication on the same grid, as dosecover handled them
// before sonications could be measured on their own planes) and compares
// the coverage figures with those the analysis gave before that change,
// recorded in testdata/single-slab-figures.json (a regression reference:
// the earlier analysis of the same simulated sessions, not an outside
// one; their accuracy is checked against the simulator's truth by
// TestDemoCase and the residual heat tests). Tolerance: 0.2 points of
// every fraction. A session from the slab layout whose slab does not hold
// all the heating (monitored 78 %) is among them, so the monitoring rule
// for planes is checked to leave a shared slab's monitored region as the
// strict rule had it. If the simulator's output changes, the reference
// must be made again with the analysis of commit dff72a8.
func TestSingleSlabFiguresUnchanged(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses two simulated sessions")
	}
	b, err := os.ReadFile(filepath.Join("testdata", "single-slab-figures.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Cases map[string]map[string]float64 `json:"cases"`
	}
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatalf("testdata/single-slab-figures.json: %v", err)
	}
	sessions := map[string]*sim.Session{
		"demo":        sim.DemoSession(),
		"planes-slab": sim.PlanesSession(sim.LayoutSlab, 1),
	}
	if len(ref.Cases) != len(sessions) {
		t.Fatalf("%d reference cases, %d sessions", len(ref.Cases), len(sessions))
	}
	for name, s := range sessions {
		want, ok := ref.Cases[name]
		if !ok {
			t.Fatalf("no reference figures for %s", name)
		}
		t.Run(name, func(t *testing.T) {
			r := analyseSession(t, s)
			got := figures(t, r)
			for k, w := range want {
				g, ok := got[k]
				if !ok {
					t.Errorf("%s: no figure %s in the result", name, k)
					continue
				}
				if d := math.Abs(g - w); !(d <= 0.002) {
					t.Errorf("%s: %s %.4f, %.4f before (difference %.2f points > 0.2)", name, k, g, w, 100*d)
				}
			}
		})
	}
}

// figures returns the fractions of r's JSON that the reference holds
// (through the JSON, so that a field that may be null reads as absent).
func figures(t *testing.T, r *review.Result) map[string]float64 {
	t.Helper()
	b, err := json.Marshal(r)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	out := map[string]float64{}
	for _, k := range []string{"covered_fraction", "covered_fraction_of_target", "monitored_fraction"} {
		if x, ok := m[k].(float64); ok {
			out[k] = x
		}
	}
	if h, ok := m["holes"].([]any); ok && len(h) > 0 {
		if x, ok := h[0].(map[string]any)["fraction_of_target"].(float64); ok {
			out["largest_hole_fraction_of_target"] = x
		}
	}
	return out
}

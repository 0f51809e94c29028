package report

import (
	"context"
	"path/filepath"
	"testing"
	"time"

	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/review"
)

// TestDemoGolden is the golden image of the report of the built-in demo
// case (sim.WriteDemo, invented), read back through the case reader and
// analysed with the default settings, as "dosecover report" does.
func TestDemoGolden(t *testing.T) {
	if testing.Short() {
		t.Skip("simulates, reads and analyses the demo case")
	}
	dir := filepath.Join(t.TempDir(), "demo")
	if _, err := sim.WriteDemo(dir); err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	c, _, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	r, err := review.Analyze(ctx, c, review.DefaultSettings(), nil)
	if err != nil {
		t.Fatal(err)
	}
	sum, _, err := review.HashInputs(context.Background(), dir)
	if err != nil {
		t.Fatal(err)
	}
	in, err := FromResult(c, r, Options{
		Reviewer: "Teaching round", ReviewDate: time.Date(2026, 11, 2, 9, 30, 0, 0, time.UTC),
		InputsSHA256: sum, PanelPixels: 240,
	})
	if err != nil {
		t.Fatal(err)
	}
	img, err := RenderImage(in, goldenDPI)
	if err != nil {
		t.Fatal(err)
	}
	comparePixels(t, img, filepath.Join("testdata", "demo.png"), 16, 0.001)
}

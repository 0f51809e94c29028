package review_test

import (
	"context"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/review"
)

// TestDemoCase analyses the simulated demo case end to end (DICOM files
// written by the simulator, read by the case reader) and checks it against
// the simulation's truth.json: the lethal cluster beyond the margin is
// attributed to the sonication the simulation aimed beyond it, every
// under-dosed region the simulation reports lies in a reported hole, the
// largest hole is where the largest simulated region is, and the target
// volume matches the simulated phantom.
func TestDemoCase(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses the demo case")
	}
	dir := t.TempDir()
	truth, err := sim.WriteDemo(dir)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	c, inv, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !inv.Reviewable {
		t.Fatalf("demo not reviewable: %s", inv.NotReviewable)
	}
	set := review.DefaultSettings()
	set.Trials = 4
	r, err := review.Analyze(ctx, c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Target volume: the slab model of the simulator's contours against
	// the phantom's volume on the 1.2 mm bioheat grid, within 5 %.
	if got := r.TargetVolumeML * 1000; got < 0.95*truth.TargetVolumeMM3 || got > 1.05*truth.TargetVolumeMM3 {
		t.Errorf("target %.1f mm³, truth %.1f", got, truth.TargetVolumeMM3)
	}
	if len(truth.Spill) > 0 {
		if len(r.OutsideClusters) == 0 {
			t.Fatalf("no lethal cluster beyond the margin; truth: sonication(s) %v", truth.Spill)
		}
		found := false
		for _, cl := range r.OutsideClusters {
			for _, s := range truth.Spill {
				found = found || cl.Sonication == s
			}
		}
		if r.OutsideClusters[0].Sonication != truth.Spill[0] || !found {
			t.Errorf("largest cluster beyond the margin attributed to sonication %d; truth %v", r.OutsideClusters[0].Sonication, truth.Spill)
		}
	}
	g := r.HoleLabels.Geometry
	for _, h := range truth.Holes {
		i, j, k := g.Voxel(h.Center)
		ii, jj, kk := int(i+0.5), int(j+0.5), int(k+0.5)
		if !g.Contains(ii, jj, kk) || r.HoleLabels.At(ii, jj, kk) == 0 {
			t.Errorf("simulated under-dosed region at %v (%.0f mm³) is not in a reported hole", h.Center, h.VolumeMM3)
		}
	}
	// The largest simulated under-dosed region is where the largest hole
	// is: centroids within 4 mm (one 3.5 mm thermometry slice plus
	// rounding; the thermometry sees the region blurred by partial volume,
	// so the hole is larger than the simulated one).
	if len(truth.Holes) > 0 && len(r.Holes) > 0 {
		if d := dosemap.Vec3(r.Holes[0].CentroidMM).Sub(truth.Holes[0].Center).Norm(); d > 4 {
			t.Errorf("largest hole at %v, simulated under-dosed region at %v (%.1f mm apart)", r.Holes[0].CentroidMM, truth.Holes[0].Center, d)
		}
	}
	if err := r.WriteJSON(io.Discard); err != nil {
		t.Errorf("JSON: %v", err)
	}
	// The simulation's covered fraction comes from its own 1.2 mm
	// temperature grid, not from the thermometry images: logged for
	// comparison, not asserted.
	t.Logf("covered %.3f of the monitored target (truth on the bioheat grid %.3f); %d holes; %.1f mm³ beyond the margin (truth %.1f)",
		(*r.CoveredFraction), truth.CoveredFraction, len(r.Holes), 1000*r.OutsideMarginLethalML, truth.LethalOutsideMM3)
}

// TestDeferredLoadSameResult analyses a simulated case loaded with
// its thermometry frames in memory and loaded with them left in the files
// (dicomio.LoadOptions.Deferred, as the commands do): the results must be
// identical, to the last digit of the JSON, so the way of reading cannot
// change a figure.
func TestDeferredLoadSameResult(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses a simulated case twice")
	}
	// The typical session's 128×128 field of view cut down to four
	// sonications of eight frames: the Monte Carlo then keeps a block of
	// the field, not all of it.
	dir := t.TempDir()
	ses := sim.TypicalSession(5)
	ses.Sonications = ses.Sonications[8:12]
	ses.Thermometry.Frames = 8
	if _, err := sim.WriteSession(dir, ses); err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	set := review.DefaultSettings()
	set.Trials = 20
	out := make([]string, 2)
	temps := make([]*dosemap.TemperatureSeries, 2)
	// The probe inside the kept block (the lesion centre) and far outside
	// it (a voxel near the corner of the field, which a deferred session
	// computes from the files), and the peak temperature map.
	probes := make([][2]*review.Probe, 2)
	peaks := make([]*dosemap.Volume, 2)
	for n, deferred := range []bool{false, true} {
		c, inv, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{Deferred: deferred}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if !inv.Reviewable {
			t.Fatalf("not reviewable: %s", inv.NotReviewable)
		}
		if deferred && (c.Sonications[0].Phase != nil || c.Sonications[0].Source == nil) {
			t.Fatal("the deferred load holds the frames in memory")
		}
		ses, err := review.Prepare(ctx, c, set, nil)
		if err != nil {
			t.Fatal(err)
		}
		// The whole temperature series, kept or computed again.
		if temps[n] = ses.Temperature(c.Sonications[1].Number); temps[n] == nil {
			t.Fatalf("no temperature series (deferred %v)", deferred)
		}
		g := c.Sonications[0].Geometry
		for k, p := range []dosemap.Vec3{{-3, -10, 20}, g.Point(4, 5, 2)} {
			if probes[n][k], err = ses.Probe(p, set); err != nil {
				t.Fatalf("probe at %v (deferred %v): %v", p, deferred, err)
			}
		}
		if peaks[n], err = ses.PeakTemperature(set); err != nil || peaks[n] == nil {
			t.Fatalf("peak temperature (deferred %v): %v", deferred, err)
		}
		r, err := ses.Analyze(ctx, set, nil)
		if err != nil {
			t.Fatal(err)
		}
		// The comparison covers the Monte Carlo only if its band is open.
		if r.CoveredFractionP05 == nil || r.CoveredFractionP95 == nil || *r.CoveredFractionP05 == *r.CoveredFractionP95 {
			t.Fatalf("Monte Carlo band %v–%v: the case does not exercise the uncertainty", r.CoveredFractionP05, r.CoveredFractionP95)
		}
		var b strings.Builder
		if err := r.WriteJSON(&b); err != nil {
			t.Fatal(err)
		}
		out[n] = b.String()
	}
	if out[0] != out[1] {
		t.Errorf("results differ between the resident and the deferred load:\n%s\n%s", out[0][:min(400, len(out[0]))], out[1][:min(400, len(out[1]))])
	}
	if temps[0].Geometry != temps[1].Geometry || len(temps[0].Frames) != len(temps[1].Frames) {
		t.Fatalf("temperature series on %v (%d frames) and %v (%d frames)", temps[0].Geometry, len(temps[0].Frames), temps[1].Geometry, len(temps[1].Frames))
	}
	for f := range temps[0].Frames {
		for v, x := range temps[0].Frames[f] {
			if y := temps[1].Frames[f][v]; x != y && !(x != x && y != y) {
				t.Fatalf("temperature frame %d voxel %d: %g resident, %g deferred", f, v, x, y)
			}
		}
	}
	same := func(x, y float64) bool { return x == y || (x != x && y != y) }
	for k := range probes[0] {
		a, b := probes[0][k], probes[1][k]
		if a.Description != b.Description || len(a.Temp) != len(b.Temp) || len(a.Temp) == 0 {
			t.Fatalf("probe %d: %q (%d samples) resident, %q (%d) deferred", k, a.Description, len(a.Temp), b.Description, len(b.Temp))
		}
		for i := range a.Temp {
			if !same(a.Temp[i], b.Temp[i]) || !same(a.Mean[i], b.Mean[i]) || !same(a.Dose[i], b.Dose[i]) {
				t.Fatalf("probe %d sample %d: %g/%g/%g resident, %g/%g/%g deferred", k, i, a.Temp[i], a.Mean[i], a.Dose[i], b.Temp[i], b.Mean[i], b.Dose[i])
			}
		}
	}
	if peaks[0].Geometry != peaks[1].Geometry {
		t.Fatalf("peak temperature on %v resident, %v deferred", peaks[0].Geometry, peaks[1].Geometry)
	}
	for v := range peaks[0].Data {
		if x, y := peaks[0].Data[v], peaks[1].Data[v]; !same(float64(x), float64(y)) {
			t.Fatalf("peak temperature voxel %d: %g resident, %g deferred", v, x, y)
		}
	}
	if !strings.Contains(out[0], `"covered_fraction"`) {
		t.Errorf("no covered fraction in the result")
	}
	// A file that changes between reading the attributes and the frames
	// is named in the result's warnings; its frames count as not
	// monitored.
	c, _, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{Deferred: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	files, _ := filepath.Glob(filepath.Join(dir, "sonication-01", "*"))
	if len(files) == 0 {
		t.Fatal("no files of sonication 1")
	}
	f, err := os.OpenFile(files[0], os.O_APPEND|os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	f.Write([]byte{0, 0})
	f.Close()
	r, err := review.Analyze(ctx, c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	rel, _ := filepath.Rel(dir, files[0])
	found := false
	for _, w := range r.Warnings {
		found = found || (strings.Contains(w, rel) && strings.Contains(w, "sonication 1"))
	}
	if !found {
		t.Errorf("no warning names the changed file %s: %q", rel, r.Warnings)
	}
}

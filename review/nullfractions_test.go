package review

import (
	"context"
	"encoding/json"
	"math"
	"strings"
	"testing"

	"dosecover/dosemap"
)

// maskFraction counts, from the masks of a result, the part of the
// monitored target where lethal (a Result.Lethal mask, 1 where lethal) is
// set: Σ occupancy·monitored·lethal / Σ occupancy·monitored over the
// analysis voxels, with the occupancy and monitoring masks of mon (the
// definition of a fraction of the monitored target, README "Method").
// ok is false when no part of the target is monitored.
func maskFraction(mon *Result, lethal *dosemap.Volume) (f float64, ok bool) {
	var num, den float64
	for v, o := range mon.TargetMask.Data {
		if o == 0 || mon.Monitoring.Monitored.Data[v] != 1 {
			continue
		}
		den += float64(o)
		if lethal.Data[v] == 1 {
			num += float64(o)
		}
	}
	if den == 0 {
		return 0, false
	}
	return num / den, true
}

// TestFractionsCountedFromMasks: on an ordinary case (three dose-map
// sonications, a thermometry slab that leaves part of the target not
// monitored, so that fractions of the monitored target and of the whole
// target differ) every fraction of the monitored target equals the same
// fraction counted from the masks of an independent analysis:
//
//   - dvh.target at dose d and coverage_vs_threshold at threshold d: the
//     lethal mask of the analysis with threshold d (the cumulative DVH is
//     the covered fraction as a function of the threshold; ICRU Report 83);
//   - cumulative_coverage after sonication k: the lethal mask of the
//     analysis with the later sonications excluded (the dose of dose maps
//     adds up); added_coverage the step from k−1 to k (README, "Method":
//     a voxel is credited to the first sonication after which it is
//     lethal).
//
// Tolerance 1e-9: the masks are the same voxels; only the order of the
// float64 sums differs (about 1e-15 relative). An avoid structure that lies
// outside the analysis grid has a null monitored fraction (none of it can
// be monitored), an avoid structure inside it a number.
func TestFractionsCountedFromMasks(t *testing.T) {
	g := thermoGrid(40, 40, 4) // |z| <= 6 mm of a target r = 10 mm (TestNotMonitored)
	c := &dosemap.Case{
		Sonications: []*dosemap.Sonication{
			doseSonication(1, g, ballDose(dosemap.Vec3{-4, 0, 0}, 5, 1.5)),
			doseSonication(2, g, ballDose(dosemap.Vec3{4, 1, 0}, 5, 1.5)),
			doseSonication(3, g, ballDose(dosemap.Vec3{0, -3, 1}, 4, 1.5)),
		},
		Structures: []dosemap.Structure{
			sphereStructure("target", dosemap.Vec3{0.2, 0.1, 0}, 10, 1.5, 0, 128, dosemap.RoleTarget),
			sphereStructure("nerve", dosemap.Vec3{14, 0, 0}, 3, 1, 0.5, 64, dosemap.RoleAvoid),
			sphereStructure("far", dosemap.Vec3{300, 0, 0}, 3, 1, 0.5, 64, dosemap.RoleAvoid),
		},
	}
	ctx := context.Background()
	set := DefaultSettings()
	set.Trials = 0
	ses, err := Prepare(ctx, c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	analyse := func(s Settings) *Result {
		t.Helper()
		r, err := ses.Analyze(ctx, s, nil)
		if err != nil {
			t.Fatal(err)
		}
		return r
	}
	r := analyse(set)
	if !(r.MonitoredFraction > 0.5 && r.MonitoredFraction < 0.95) || r.CoveredFraction == nil {
		t.Fatalf("monitored %.3f of the target, covered %s; want a target monitored in part", r.MonitoredFraction, PercentText(r.CoveredFraction))
	}
	const tol = 1e-9
	near := func(got *float64, want float64) bool { return got != nil && math.Abs(*got-want) <= tol }
	if f, _ := maskFraction(r, r.Lethal); !near(r.CoveredFraction, f) {
		t.Errorf("covered fraction %s, counted %.6f", PercentText(r.CoveredFraction), f)
	}
	if len(r.DVH.Target) != len(r.DVH.Dose) || len(r.DVH.MarginShell) != len(r.DVH.Dose) || len(r.CoverageVsThreshold) != 40 {
		t.Fatalf("DVH of %d/%d/%d levels, %d threshold points", len(r.DVH.Dose), len(r.DVH.Target), len(r.DVH.MarginShell), len(r.CoverageVsThreshold))
	}
	countAt := func(d float64) float64 {
		s := set
		s.Threshold = d
		f, ok := maskFraction(r, analyse(s).Lethal)
		if !ok {
			t.Fatal("nothing monitored")
		}
		return f
	}
	between := 0
	for n, d := range r.DVH.Dose {
		if n%3 != 0 { // every third level: 31 analyses
			continue
		}
		want := countAt(d)
		if math.Abs(r.DVH.Target[n]-want) > tol {
			t.Errorf("dvh.target at %g: %.9f, counted %.9f", d, r.DVH.Target[n], want)
		}
		if want > 0 && want < 1 {
			between++
		}
	}
	for _, p := range r.CoverageVsThreshold {
		want := countAt(p.Threshold)
		if !near(p.CoveredFraction, want) {
			t.Errorf("coverage_vs_threshold at %g: %s, counted %.9f", p.Threshold, ptrString(p.CoveredFraction), want)
		}
		if want > 0 && want < 1 {
			between++
		}
	}
	if between < 10 {
		t.Errorf("only %d levels with a fraction strictly between 0 and 1: the case does not test the curves", between)
	}
	prev := 0.0
	for k, st := range r.Sonications {
		s := set
		for later := k + 1; later < len(r.Sonications); later++ {
			s.Excluded = append(s.Excluded, r.Sonications[later].Number)
		}
		want, _ := maskFraction(r, analyse(s).Lethal)
		if !near(st.CumulativeCoverage, want) {
			t.Errorf("sonication %d: cumulative_coverage %s, counted %.9f", st.Number, ptrString(st.CumulativeCoverage), want)
		}
		if !near(st.AddedCoverage, want-prev) || !(want-prev > 0) {
			t.Errorf("sonication %d: added_coverage %s, counted %.9f (want more than 0: each sonication adds)", st.Number, ptrString(st.AddedCoverage), want-prev)
		}
		prev = want
	}
	if len(r.Avoid) != 2 || r.Avoid[0].MonitoredFraction == nil || r.Avoid[1].MonitoredFraction != nil || r.Avoid[1].VolumeML != 0 {
		t.Errorf("avoid %+v: want a monitored fraction for the nerve, null for the structure outside the grid", r.Avoid)
	}
	var js strings.Builder
	if err := r.WriteJSON(&js); err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Avoid []map[string]any `json:"avoid"`
	}
	if err := json.Unmarshal([]byte(js.String()), &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Avoid) != 2 || doc.Avoid[1]["monitored_fraction"] != nil {
		t.Errorf("JSON avoid %v, want monitored_fraction null for %q", doc.Avoid, "far")
	}
}

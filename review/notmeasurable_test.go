package review_test

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"strings"
	"testing"

	"dosecover/dosemap/sim"
	"dosecover/review"
)

// singlePlaneSession writes the simulated 35-sonication session of
// sim.PlanesSession with one 3 mm axial plane through each focus (a
// moving slab of one slice), reads it back and prepares it. Each plane
// sees its sonication's heating end along the beam and across it in the
// plane, never along the plane's normal, and the foci lie on five depths
// 3 mm apart: every part of the target lies within reach of some
// sonication on another depth that did not measure it.
func singlePlaneSession(t *testing.T) *review.Session {
	t.Helper()
	if testing.Short() {
		t.Skip("writes and prepares a 35-sonication session")
	}
	s := sim.PlanesSession(sim.LayoutMovingSlab, 5)
	s.Thermometry.Slices = 1
	c, _ := loadSession(t, s)
	ctx := context.Background()
	ses, err := review.Prepare(ctx, c, review.DefaultSettings(), nil)
	if err != nil {
		t.Fatal(err)
	}
	return ses
}

// TestSinglePlaneSession analyses the single-plane session.
//
// With the default monitoring rule (the extent along the unmeasured
// normal taken as the longest measured one) no part of the target is
// monitored: the coverage of the monitored target is then not measurable,
// null in the JSON and "not measurable" in the text, never 0 %.
//
// The focal length setting replaces that assumed extent by half the
// focal length (README, "Planes and the monitoring rule"). Checked against
// the rule's definition: along the unmeasured axis the semi-axis grows by
// exactly the difference of the half focal lengths (the plane saw no
// extent along its normal), the measured axes do not change, with 0 it is
// the longest measured semi-axis, and the monitored part of the target
// shrinks as the focal length grows (a longer reach leaves more of the
// target within reach of a sonication that did not measure it).
func TestSinglePlaneSession(t *testing.T) {
	ses := singlePlaneSession(t)
	ctx := context.Background()
	analyse := func(focal float64) *review.Result {
		t.Helper()
		set := review.DefaultSettings()
		set.Trials = 0
		set.FocalLengthMM = focal
		r, err := ses.Analyze(ctx, set, nil)
		if err != nil {
			t.Fatal(err)
		}
		return r
	}

	r := analyse(0)
	if r.MonitoredVolumeML != 0 || r.CoveredFraction != nil {
		t.Fatalf("default rule: monitored %.3f mL, covered %v; want nothing monitored and no coverage", r.MonitoredVolumeML, review.PercentText(r.CoveredFraction))
	}
	var js bytes.Buffer
	if err := r.WriteJSON(&js); err != nil {
		t.Fatal(err)
	}
	var doc map[string]any
	if err := json.Unmarshal(js.Bytes(), &doc); err != nil {
		t.Fatal(err)
	}
	if v, ok := doc["covered_fraction"]; !ok || v != nil {
		t.Errorf("JSON covered_fraction %v (present %v), want null", v, ok)
	}
	if v := doc["schema_version"]; v != float64(review.SchemaVersion) || review.SchemaVersion < 4 {
		t.Errorf("JSON schema_version %v, want %d (4 or later: every fraction of the monitored target null)", v, review.SchemaVersion)
	}
	checkNullFractions(t, doc)
	var txt bytes.Buffer
	if err := r.WriteText(&txt); err != nil {
		t.Fatal(err)
	}
	for _, l := range strings.Split(txt.String(), "\n") {
		if strings.HasPrefix(l, "Covered") && (!strings.Contains(l, "not measurable") || strings.Contains(l, "0.0 %")) {
			t.Errorf("text: %q, want \"not measurable\" and no 0.0 %%", l)
		}
	}
	if !strings.Contains(txt.String(), "Covered (dose >= 240 CEM43): not measurable") {
		t.Errorf("text has no \"not measurable\" coverage line:\n%s", txt.String())
	}
	// The sonication table: the coverage each one added is not measurable.
	_, table, _ := strings.Cut(txt.String(), "coverage added")
	table, _, _ = strings.Cut(table, "(residual")
	if rows := strings.Count(table, "not measurable"); rows != len(r.Sonications) || strings.Contains(table, "%") {
		t.Errorf("text: %d sonication rows say \"not measurable\" (want %d) or a row shows a percentage:\n%s", rows, len(r.Sonications), table)
	}

	unmeasured := func(sr review.SonicationReach) (axis int, longest float64) {
		axis = -1
		for a, m := range sr.Measured {
			if !m {
				axis = a
			} else {
				longest = math.Max(longest, sr.SemiAxesMM[a])
			}
		}
		return axis, longest
	}
	short, mid, long, longer := analyse(2), analyse(6), analyse(40), analyse(60)
	checked := 0
	for n, sr := range r.Monitoring.Reach {
		if sr.SemiAxesMM == nil {
			continue
		}
		a, longest := unmeasured(sr)
		if a < 0 {
			continue
		}
		checked++
		if got := sr.SemiAxesMM[a]; math.Abs(got-longest) > 1e-9 {
			t.Errorf("sonication %d, focal length 0: unmeasured semi-axis %.3f mm, want the longest measured %.3f mm", sr.Sonication, got, longest)
		}
		l, ll := long.Monitoring.Reach[n], longer.Monitoring.Reach[n]
		// 60/2 − 40/2 = 10 mm, exactly (tolerance: float rounding).
		if d := ll.SemiAxesMM[a] - l.SemiAxesMM[a]; math.Abs(d-10) > 1e-9 {
			t.Errorf("sonication %d: unmeasured semi-axis %.3f mm at 40 mm, %.3f mm at 60 mm; want 10 mm apart", sr.Sonication, l.SemiAxesMM[a], ll.SemiAxesMM[a])
		}
		for b := range 3 {
			if b != a && (l.SemiAxesMM[b] != sr.SemiAxesMM[b] || ll.SemiAxesMM[b] != sr.SemiAxesMM[b]) {
				t.Errorf("sonication %d: measured semi-axis %d changed with the focal length: %.3f, %.3f, %.3f mm", sr.Sonication, b, sr.SemiAxesMM[b], l.SemiAxesMM[b], ll.SemiAxesMM[b])
			}
		}
	}
	if checked == 0 {
		t.Fatal("no sonication with an unmeasured axis")
	}
	t.Logf("monitored part of the target: %.3f (focal length 2 mm), %.3f (6 mm), %.3f (0: longest measured), %.3f (40 mm), %.3f (60 mm); covered at 2 mm %s",
		short.MonitoredFraction, mid.MonitoredFraction, r.MonitoredFraction, long.MonitoredFraction, longer.MonitoredFraction, review.PercentText(short.CoveredFraction))
	if !(short.MonitoredFraction > 0.5) || short.CoveredFraction == nil {
		t.Errorf("focal length 2 mm: %.3f of the target monitored, want most of it (each plane holds its heating within 1 mm of its normal)", short.MonitoredFraction)
	}
	if !(short.MonitoredFraction > mid.MonitoredFraction && mid.MonitoredFraction >= long.MonitoredFraction && long.MonitoredFraction >= longer.MonitoredFraction) {
		t.Errorf("monitored part does not shrink as the focal length grows: %.3f, %.3f, %.3f, %.3f (2, 6, 40, 60 mm)",
			short.MonitoredFraction, mid.MonitoredFraction, long.MonitoredFraction, longer.MonitoredFraction)
	}
}

// checkNullFractions fails unless every fraction of the monitored target in
// the result JSON doc is null (schema 4): dvh.target,
// coverage_vs_threshold[].covered_fraction (the thresholds still listed),
// sonications[].added_coverage and cumulative_coverage.
func checkNullFractions(t *testing.T, doc map[string]any) {
	t.Helper()
	dvh, _ := doc["dvh"].(map[string]any)
	if v, ok := dvh["target"]; !ok || v != nil {
		t.Errorf("JSON dvh.target %v (present %v), want null", v, ok)
	}
	if d, _ := dvh["dose"].([]any); len(d) == 0 {
		t.Errorf("JSON dvh.dose %v, want the dose levels", dvh["dose"])
	}
	pts, _ := doc["coverage_vs_threshold"].([]any)
	if len(pts) == 0 {
		t.Errorf("coverage_vs_threshold %v, want the thresholds with null fractions", doc["coverage_vs_threshold"])
	}
	for _, p := range pts {
		m, _ := p.(map[string]any)
		if v, ok := m["covered_fraction"]; !ok || v != nil || m["threshold"] == nil {
			t.Errorf("coverage_vs_threshold point %v, want a threshold and covered_fraction null", p)
			break
		}
	}
	sons, _ := doc["sonications"].([]any)
	if len(sons) == 0 {
		t.Errorf("no sonications in the JSON")
	}
	for _, s := range sons {
		m, _ := s.(map[string]any)
		a, aok := m["added_coverage"]
		c, cok := m["cumulative_coverage"]
		if !aok || !cok || a != nil || c != nil {
			t.Errorf("sonication %v: added_coverage %v, cumulative_coverage %v (present %v, %v), want both null", m["number"], a, c, aok, cok)
			break
		}
	}
}

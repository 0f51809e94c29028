package review_test

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/sim"
	"dosecover/review"
)

// residualCase writes s, analyses it as measured and with the residual
// heat correction (no Monte Carlo), and returns both results with the
// simulation's truth.
func residualCase(t *testing.T, s *sim.Session) (measured, corrected *review.Result, truth *sim.Truth) {
	t.Helper()
	c, truth := loadSession(t, s)
	ctx := context.Background()
	var err error
	set := review.DefaultSettings()
	set.Trials = 0
	if measured, err = review.Analyze(ctx, c, set, nil); err != nil {
		t.Fatal(err)
	}
	set.CarryOver = true
	if corrected, err = review.Analyze(ctx, c, set, nil); err != nil {
		t.Fatal(err)
	}
	return measured, corrected, truth
}

// residualWarning returns the residual heat warning of r, or "".
func residualWarning(r *review.Result) string {
	for _, w := range r.Warnings {
		if strings.HasPrefix(w, "heat left from earlier sonications") {
			return w
		}
	}
	return ""
}

// TestResidualHeatShortGaps analyses simulated sessions whose sonications
// follow each other after 5 to 60 s of cooling (sim.ShortGapSession: the
// demo's gel phantom and plan, every spot delivered, and once with three
// spots left out so that the true coverage stays below 100 %) and checks
// against
// the simulation's truth, which is the Pennes bioheat equation integrated
// on a 1.2 mm grid and sampled on the thermometry voxels (truth.json):
//
//   - each sonication's residual_rise_c within 30 % or 1 °C, whichever is
//     larger, of the simulated rise at its baseline (HiddenRiseC, the same
//     largest value over the target and margin); 1 °C is about the noise of
//     one thermometry voxel at the simulated SNR (common practice);
//   - a warning names the sonications above 1 °C;
//   - with carry_over, coverage within 3 points of the coverage of the
//     noiseless thermometry with the hidden heat counted
//     (noiseless_thermometry.with_hidden_heat); 3 points allows for the
//     analysis grid's partial-volume target edge against the truth's
//     voxel-centre target;
//   - the as-measured figures beside the corrected ones are exactly those of
//     the analysis without the correction, which itself carries no
//     corrected figures.
func TestResidualHeatShortGaps(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses four simulated sessions")
	}
	type gapCase struct {
		gap  float64
		skip []int // planned spots left out (a hole the hidden heat may not fill)
	}
	for _, tc := range []gapCase{{5, nil}, {13, nil}, {30, nil}, {60, nil}, {13, []int{4, 8, 12}}} {
		gap := tc.gap
		t.Run(fmt.Sprintf("%gs-skip%v", gap, tc.skip), func(t *testing.T) {
			s := sim.ShortGapSession(gap)
			if tc.skip != nil {
				kept := s.Sonications[:0]
				for _, so := range s.Sonications {
					if !slices.Contains(tc.skip, so.Planned) {
						kept = append(kept, so)
					}
				}
				s.Sonications = kept
			}
			m, c, tr := residualCase(t, s)
			if len(c.Sonications) != len(tr.Sonications) {
				t.Fatalf("%d sonications analysed, %d simulated", len(c.Sonications), len(tr.Sonications))
			}
			var above []int
			worst, worstN := 0.0, 0
			for n, st := range c.Sonications {
				want := tr.Sonications[n].HiddenRiseC
				if st.ResidualRiseC == nil {
					t.Errorf("sonication %d: residual_rise_c unknown; simulated %.2f °C", st.Number, want)
					continue
				}
				got := *st.ResidualRiseC
				if e := (got - want) / math.Max(want, 1e-9); math.Abs(e) > math.Abs(worst) && want > 1 {
					worst, worstN = e, st.Number
				}
				if math.Abs(got-want) > math.Max(0.3*want, 1) {
					t.Errorf("sonication %d: residual_rise_c %.2f °C, simulated %.2f °C (tolerance 30 %% or 1 °C)", st.Number, got, want)
				}
				if got > 1 {
					above = append(above, st.Number)
				}
				if n == 0 && (got != 0 || st.CoolingS != nil) {
					t.Errorf("first sonication: residual %v °C, cooling %v s; want 0 and null", got, st.CoolingS)
				}
				if n > 0 && (st.CoolingS == nil || math.Abs(*st.CoolingS-gap) > 0.01) {
					t.Errorf("sonication %d: cooling_s %v, simulated gap %g s", st.Number, st.CoolingS, gap)
				}
			}
			w := residualWarning(c)
			if len(above) == 0 || w == "" {
				t.Fatalf("sonications above 1 °C %v; warning %q", above, w)
			}
			for _, n := range above {
				if !strings.Contains(w, fmt.Sprintf(" %d (", n)) {
					t.Errorf("warning does not name sonication %d: %q", n, w)
				}
			}
			if d := (*c.CoveredFraction) - tr.Measured.WithHiddenHeat.CoveredFraction; math.Abs(d) > 0.03 {
				t.Errorf("corrected coverage %.3f, simulated with the hidden heat %.3f", (*c.CoveredFraction), tr.Measured.WithHiddenHeat.CoveredFraction)
			}
			if !c.CarryOver || c.AsMeasured == nil || m.CarryOver || m.AsMeasured != nil {
				t.Fatalf("carry_over %v/%v, as_measured %v/%v", m.CarryOver, c.CarryOver, m.AsMeasured, c.AsMeasured)
			}
			if (*c.AsMeasured.CoveredFraction) != (*m.CoveredFraction) || c.AsMeasured.CoveredFractionOfTarget != m.CoveredFractionOfTarget ||
				c.AsMeasured.OutsideMarginLethalML != m.OutsideMarginLethalML {
				t.Errorf("as measured beside the correction %+v; without it covered %v of %v, outside %v mL",
					*c.AsMeasured, (*m.CoveredFraction), m.CoveredFractionOfTarget, m.OutsideMarginLethalML)
			}
			if !((*c.CoveredFraction) > (*m.CoveredFraction)) {
				t.Errorf("the correction did not raise coverage: %.3f as measured, %.3f corrected", (*m.CoveredFraction), (*c.CoveredFraction))
			}
			t.Logf("largest residual error %+.0f %% (sonication %d); coverage as measured %.3f (noiseless truth %.3f), corrected %.3f (truth with the hidden heat %.3f)",
				100*worst, worstN, (*m.CoveredFraction), tr.Measured.CoveredFraction, (*c.CoveredFraction), tr.Measured.WithHiddenHeat.CoveredFraction)
		})
	}
}

// TestResidualHeatLongGaps: when the tissue has cooled between
// sonications (gaps of 40 minutes in the gel phantom: the simulated rise
// left at each baseline below 0.5 °C), no residual heat warning is given
// and the estimates stay within 1 °C of the simulated ones.
func TestResidualHeatLongGaps(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and analyses a simulated session")
	}
	s := sim.ShortGapSession(2400)
	s.Sonications = s.Sonications[:4]
	m, c, tr := residualCase(t, s)
	for n, st := range m.Sonications {
		want := tr.Sonications[n].HiddenRiseC
		if want >= 0.5 {
			t.Fatalf("sonication %d: simulated residual %.2f °C; the case is meant to have cooled", st.Number, want)
		}
		if st.ResidualRiseC == nil || math.Abs(*st.ResidualRiseC-want) > 1 {
			t.Errorf("sonication %d: residual_rise_c %v, simulated %.2f °C (tolerance 1 °C)", st.Number, st.ResidualRiseC, want)
		}
	}
	for _, r := range []*review.Result{m, c} {
		if w := residualWarning(r); w != "" {
			t.Errorf("warning on a cooled session (carry_over %v): %s", r.CarryOver, w)
		}
	}
}

// TestProbeEstimatedTrue: the pinned point's estimated true temperature is
// the measured one plus the session's residual heat estimate at that
// sonication's baseline (Session.Residual). Two temperature-map
// sonications 45 s apart on ballCase's target: the first holds 52 °C at
// the centre, cooling 2 °C a frame over its last frames; the second
// measures no change, and its estimated true temperature there must lie
// above 37 °C by the session's estimate. With carry_over the temperatures
// hold the estimate already and the two curves agree.
func TestProbeEstimatedTrue(t *testing.T) {
	c := ballCase()
	g := c.Sonications[0].Geometry
	centre := g.Index(g.Cols/2, g.Rows/2, g.Slices/2)
	start := time.Date(2026, 1, 2, 10, 0, 0, 0, time.UTC)
	c.Sonications = nil
	for n := range 2 {
		so := &dosemap.Sonication{Number: n + 1, Label: "temperature map", Geometry: g,
			Start: start.Add(time.Duration(n*45) * time.Second), Times: []float64{0, 3, 6, 9, 12, 15, 18, 21, 24}}
		for f := range so.Times {
			fr := make([]float32, g.Len())
			for v := range fr {
				fr[v] = 37
			}
			if n == 0 && f >= 2 {
				fr[centre] = float32(52 - 2*math.Max(0, float64(f-6)))
			}
			so.Temperature = append(so.Temperature, fr)
		}
		c.Sonications = append(c.Sonications, so)
	}
	i, j, k := g.IJK(centre)
	p := g.Point(float64(i), float64(j), float64(k))
	for _, carry := range []bool{false, true} {
		set := review.DefaultSettings()
		set.Trials, set.CarryOver = 0, carry
		ses, err := review.Prepare(context.Background(), c, set, nil)
		if err != nil {
			t.Fatal(err)
		}
		pr, err := ses.Probe(p, set)
		if err != nil {
			t.Fatal(err)
		}
		r := ses.Residual(2)
		if r == nil || len(pr.True) != 18 || len(pr.Temp) != 18 {
			t.Fatalf("carry_over %v: residual %v; %d estimated and %d measured temperatures, want 18", carry, r, len(pr.True), len(pr.Temp))
		}
		hidden := float64(r.Sample(p))
		if !(hidden > 0.1) {
			t.Fatalf("estimated residual heat at the centre %g °C; want some after 52 °C twenty-four seconds before", hidden)
		}
		for n := 9; n < 18; n++ {
			want := pr.Temp[n] + hidden
			if carry {
				want = pr.Temp[n] // the series hold the estimate already
				if math.Abs(pr.Temp[n]-(37+hidden)) > 1e-4 {
					t.Errorf("carry_over: frame %d reads %g °C, want 37 + %g", n, pr.Temp[n], hidden)
				}
			}
			if math.Abs(pr.True[n]-want) > 1e-9 {
				t.Errorf("carry_over %v, frame %d: estimated true %g °C, want %g", carry, n, pr.True[n], want)
			}
		}
		if pr.True[0] != pr.Temp[0] {
			t.Errorf("first sonication: estimated true %g °C, measured %g (no earlier heat)", pr.True[0], pr.Temp[0])
		}
	}
}

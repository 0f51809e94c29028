package review_test

import (
	"context"
	"fmt"
	"math"
	"testing"

	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/review"
)

// residualCase writes s, analyses it as measured and with the residual
// heat correction, and returns both results with the simulation's truth.
func residualCase(t *testing.T, s *sim.Session) (measured, corrected *review.Result, truth *sim.Truth) {
	t.Helper()
	dir := t.TempDir()
	truth, err := sim.WriteSession(dir, s)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	c, _, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{Deferred: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
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

func TestResidualExplore(t *testing.T) {
	for _, gap := range []float64{5, 13, 30, 60, 120} {
		t.Run(fmt.Sprint(gap), func(t *testing.T) {
			m, c, tr := residualCase(t, sim.ShortGapSession(gap))
			worst, wn := 0.0, 0
			defer func() { t.Logf("worst %.2f of tolerance at %d", worst, wn) }()
			for n, st := range c.Sonications {
				est := math.NaN()
				if st.ResidualRiseC != nil {
					est = *st.ResidualRiseC
				}
				tru := tr.Sonications[n].HiddenRiseC
				if e := math.Abs(est-tru) / math.Max(0.3*tru, 1); e > worst {
					worst, wn = e, st.Number
				}
			}
			t.Logf("coverage measured %.3f corrected %.3f asmeasured %.3f; truth measured %.3f hidden %.3f bioheat %.3f",
				m.CoveredFraction, c.CoveredFraction, c.AsMeasured.CoveredFraction, tr.Measured.CoveredFraction, tr.Measured.WithHiddenHeat.CoveredFraction, tr.CoveredFraction)
			t.Logf("outside measured %.3f corrected %.3f; truth measured %.3f hidden %.3f", m.OutsideMarginLethalML*1000, c.OutsideMarginLethalML*1000, tr.Measured.LethalOutsideMM3, tr.Measured.WithHiddenHeat.LethalOutsideMM3)
		})
	}
}

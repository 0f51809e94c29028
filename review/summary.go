package review

import (
	"fmt"
	"io"
	"math"
	"strings"
)

// WriteText writes a readable summary of r: the figures measured and the
// thresholds and settings used, followed by the cautions. It states facts
// only.
func (r *Result) WriteText(w io.Writer) error {
	var b strings.Builder
	p := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	p("dosecover %s coverage analysis", r.SoftwareVersion)
	if r.Case != "" {
		p(" of %s", r.Case)
	}
	p("\n")
	p("Settings: model %s, lethal threshold %g %s, margin %g mm", r.Model, r.Threshold, r.DoseUnit, r.MarginMM)
	if len(r.Settings.Excluded) > 0 {
		p(", excluded sonications %v", r.Settings.Excluded)
	}
	if r.Trials > 0 {
		p(", %d Monte Carlo trials (seed %d)", r.Trials, r.Settings.Seed)
	}
	if r.CarryOver {
		p(", carry-over on (estimated residual heat added)")
	}
	p("\n")
	p("Analysis grid: %d×%d×%d voxels of %.3g×%.3g×%.3g mm\n\n", r.Grid.Size[0], r.Grid.Size[1], r.Grid.Size[2],
		r.Grid.SpacingMM[0], r.Grid.SpacingMM[1], r.Grid.SpacingMM[2])

	p("Target %q: %.2f mL; monitored %.2f mL (%.1f %%), not monitored %.2f mL (%.1f %%)\n",
		r.Target, r.TargetVolumeML, r.MonitoredVolumeML, 100*r.MonitoredFraction, r.NotMonitoredML, 100*r.NotMonitoredFraction)
	if f := r.CoveredFraction; f != nil {
		p("Covered (dose >= %g %s): %.2f mL = %.1f %% of the monitored target, %.1f %% of the whole target",
			r.Threshold, r.DoseUnit, r.CoveredVolumeML, 100**f, 100*r.CoveredFractionOfTarget)
	} else {
		p("Covered (dose >= %g %s): not measurable (no part of the target is monitored)", r.Threshold, r.DoseUnit)
	}
	if r.CoveredFractionP05 != nil && r.CoveredFractionP95 != nil {
		p("; 5th-95th percentile over noise %.1f-%.1f %%", 100**r.CoveredFractionP05, 100**r.CoveredFractionP95)
	}
	p("\n")
	if a := r.AsMeasured; a != nil {
		p("Corrected for heat left from earlier sonications (carry-over). As measured, without the correction: covered %s of the monitored target, %.1f %% of the whole target; %.3f mL lethal beyond the margin\n",
			fpct(a.CoveredFraction), 100*a.CoveredFractionOfTarget, a.OutsideMarginLethalML)
	}
	p("D98 %s, D50 %s, D2 %s %s (monitored target)\n\n", fnum(r.D98), fnum(r.D50), fnum(r.D2), r.DoseUnit)
	if m := r.Monitoring; m != nil {
		p("Monitoring rule (negligible dose %.3g %s, %g %% of the threshold): %.1f %% of the target monitored; measured by every sonication %.1f %% (covered %s); on the measured planes %.1f %% (covered %s)\n\n",
			m.NegligibleDose, r.DoseUnit, 100*m.NegligibleFraction, 100*r.MonitoredFraction,
			100*m.StrictFraction, fpct(m.StrictCovered), 100*m.MeasuredFraction, fpct(m.MeasuredCovered))
	}

	p("Holes (monitored target below threshold): %d\n", len(r.Holes))
	for n, h := range r.Holes {
		if n == 10 {
			p("  ... %d more (see the JSON output)\n", len(r.Holes)-10)
			break
		}
		p("  %2d. %8.1f mm³ at (%.1f, %.1f, %.1f) mm, slice %d, depth %.1f mm", n+1, h.VolumeMM3,
			h.CentroidMM[0], h.CentroidMM[1], h.CentroidMM[2], h.CentroidSlice, h.DepthMM)
		if h.TouchesSurface {
			p(", reaches the target surface")
		}
		if h.TouchesUnmonitored {
			p(", borders unmonitored target")
		}
		if h.Certainty != "" {
			p(", %s", h.Certainty)
		}
		p("\n")
	}
	p("\nLethal volume: %.2f mL in all; %.3f mL beyond the %g mm margin in %d cluster(s)\n",
		r.LethalVolumeML, r.OutsideMarginLethalML, r.MarginMM, len(r.OutsideClusters))
	for n, c := range r.OutsideClusters {
		if n == 10 {
			p("  ... %d more (see the JSON output)\n", len(r.OutsideClusters)-10)
			break
		}
		p("  %2d. %8.1f mm³ at (%.1f, %.1f, %.1f) mm, slice %d, up to %.1f mm beyond the target, mostly sonication %d (%.0f %%)\n",
			n+1, c.VolumeMM3, c.CentroidMM[0], c.CentroidMM[1], c.CentroidMM[2], c.CentroidSlice, c.MaxDistanceMM, c.Sonication, 100*c.SonicationShare)
	}
	for _, a := range r.Avoid {
		p("Avoid %q: %.2f mL, lethal %.1f mm³, peak dose %s %s\n", a.Name, a.VolumeML, a.LethalVolumeMM3, fnum(a.PeakDose), r.DoseUnit)
	}
	p("\nSonication  peak °C  3x3 °C  >=43°C s  lethal added mL  coverage added  outside added mL  cooling s  residual °C\n")
	for _, s := range r.Sonications {
		if s.Excluded {
			p("%10d  (excluded)  %28s  %9s  %11s\n", s.Number, "", fnum0(s.CoolingS), fnum1(s.ResidualRiseC))
			continue
		}
		added := "not measurable" // of a monitored target that is empty
		if f := s.AddedCoverage; f != nil {
			added = fmt.Sprintf("%.1f%%", 100**f)
		}
		p("%10d  %7s  %6s  %8s  %15.3f  %14s  %16.3f  %9s  %11s\n", s.Number, fnum1(s.PeakTempC), fnum1(s.Peak3x3C), fnum1(s.TimeAbove43S),
			s.LethalAddedML, added, s.OutsideAddedML, fnum0(s.CoolingS), fnum1(s.ResidualRiseC))
	}
	p("(residual °C: estimated heat left from earlier sonications at the baseline, largest over the target and margin; not seen by the thermometry)\n")
	for _, q := range r.Quality {
		if len(q.FlaggedFrames) > 0 || q.Wraps > 0 {
			p("Sonication %d thermometry: flagged frames %v, suspected wraps %d, max motion %.3f, max drift %.1f °C\n",
				q.Sonication, q.FlaggedFrames, q.Wraps, q.MaxMotion, q.MaxDriftC)
		}
		if q.DriftFlagged(r.Settings.DriftFlagC) {
			p("Sonication %d thermometry: drift %.2f °C removed, above the %g °C drift flag; its dose deserves a second look\n",
				q.Sonication, math.Abs(q.MaxDriftC), driftLimit(r.Settings.DriftFlagC))
		}
	}
	if len(r.Warnings) > 0 {
		p("\nNotes:\n")
		for _, x := range r.Warnings {
			p("  - %s\n", x)
		}
	}
	p("\nCautions:\n")
	for _, x := range r.Cautions {
		p("  - %s\n", x)
	}
	_, err := io.WriteString(w, b.String())
	return err
}

func fnum(x *float64) string {
	if x == nil {
		return "n/a"
	}
	return fmt.Sprintf("%.3g", *x)
}

func fnum1(x *float64) string {
	if x == nil {
		return "n/a"
	}
	return fmt.Sprintf("%.1f", *x)
}

// PercentText formats a fraction such as Result.CoveredFraction as a
// percentage with one decimal ("87.5 %"), "not measurable" for nil.
func PercentText(f *float64) string { return fpct(f) }

// fpct formats a fraction as a percentage, "not measurable" for nil.
func fpct(f *float64) string {
	if f == nil {
		return "not measurable"
	}
	return fmt.Sprintf("%.1f %%", 100**f)
}

// fnum0 formats a value with no decimals, "n/a" for nil.
func fnum0(x *float64) string {
	if x == nil {
		return "n/a"
	}
	return fmt.Sprintf("%.0f", *x)
}

//go:build cgo

package main

import (
	"context"
	"fmt"
	"math"

	"dosecover/dosemap"
	"dosecover/review"
)

// The analysis: package review.
func init() {
	prepareCase = prepareReview
}

// reviewSession wraps a prepared review.Session for the window.
type reviewSession struct {
	c  *dosemap.Case
	rs *review.Session
}

func prepareReview(ctx context.Context, lc *loadedCase, s review.Settings, progress func(stage string, frac float64)) (session, error) {
	rs, err := review.Prepare(ctx, lc.Case, s, progress)
	if err != nil {
		return nil, err
	}
	return &reviewSession{c: lc.Case, rs: rs}, nil
}

func ptr(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

func (ss *reviewSession) Analyze(ctx context.Context, set review.Settings) (*analysisResult, error) {
	r, err := ss.rs.Analyze(ctx, set, nil)
	if err != nil {
		return nil, err
	}
	return ss.wrap(r), nil
}

// wrap turns an analysis of the session into what the window shows.
func (ss *reviewSession) wrap(r *review.Result) *analysisResult {
	out := &analysisResult{Result: r, Unit: doseUnitName(r.DoseUnit), TargetStructure: ss.c.Target()}
	for n := range ss.c.Structures {
		if st := &ss.c.Structures[n]; st.Role == dosemap.RoleAvoid {
			out.AvoidStructures = append(out.AvoidStructures, st)
		}
	}
	out.NotMonitored3D = r.NotMonitored()
	for n, h := range r.Holes {
		d := fmt.Sprintf("depth %.1f mm, slices %s", h.DepthMM, sliceList(h.Slices))
		if h.Certainty != "" {
			d += ", " + h.Certainty
		}
		if h.TouchesUnmonitored {
			d += ", borders unmonitored"
		}
		out.HoleRows = append(out.HoleRows, region{Label: fmt.Sprintf("H%d", n+1), VolumeML: h.VolumeMM3 / 1000,
			Centre: dosemap.Vec3(h.CentroidMM), MaxDose: h.MaxDose, Detail: d})
	}
	for n, c := range r.OutsideClusters {
		d := fmt.Sprintf("up to %.1f mm beyond the target, peak %s", c.MaxDistanceMM, fmtDose(c.PeakDose))
		if c.Sonication > 0 {
			d += fmt.Sprintf(", mostly sonication %d (%.0f %%)", c.Sonication, 100*c.SonicationShare)
		}
		out.SpillRows = append(out.SpillRows, region{Label: fmt.Sprintf("C%d", n+1), VolumeML: c.VolumeMM3 / 1000,
			Centre: dosemap.Vec3(c.CentroidMM), MaxDose: c.PeakDose, Detail: d})
	}
	for _, a := range r.Avoid {
		out.AvoidRows = append(out.AvoidRows, avoidDose{Name: a.Name, VolumeML: a.VolumeML, LethalML: a.LethalVolumeMM3 / 1000, MaxDose: ptr(a.PeakDose)})
	}
	for n := range r.DVH.Dose {
		if n < len(r.DVH.Target) && r.CoveredFraction != nil { // no curve of an unmonitored target
			out.DVHPoints = append(out.DVHPoints, xy{r.DVH.Dose[n], r.DVH.Target[n]})
		}
	}
	for _, p := range r.CoverageVsThreshold {
		if p.CoveredFraction != nil { // no curve of an unmonitored target
			out.CoveragePoints = append(out.CoveragePoints, xy{p.Threshold, *p.CoveredFraction})
		}
	}
	quality := map[int]review.SonicationQuality{}
	for _, q := range r.Quality {
		quality[q.Sonication] = q
	}
	var first *dosemap.Sonication
	if len(ss.c.Sonications) > 0 {
		first = ss.c.Sonications[0]
	}
	for _, st := range r.Sonications {
		row := sonicationRow{Number: st.Number, Label: st.Label, PeakTemp: ptr(st.PeakTempC), PeakDose: st.PeakDose,
			DoseAddedML: st.LethalAddedML, CoverageAdded: ptr(st.AddedCoverage), OutsideML: st.OutsideAddedML, Offset: math.NaN(),
			CoolingS: ptr(st.CoolingS), ResidualC: ptr(st.ResidualRiseC)}
		row.ResidualHigh = row.ResidualC > r.Settings.ResidualWarnC
		if so := ss.sonication(st.Number); so != nil {
			row.Start = so.Start
			if first != nil && !so.Start.IsZero() && !first.Start.IsZero() {
				row.Offset = so.Start.Sub(first.Start).Seconds()
			}
			if len(so.Times) > 0 {
				row.Duration = so.Times[len(so.Times)-1] - so.Times[0]
			}
		}
		if q, ok := quality[st.Number]; ok {
			vf := 0
			if so := ss.sonication(st.Number); so != nil {
				vf = so.Geometry.Len() * so.Frames()
			}
			row.Flags, row.Flagged = qualityFlags(q, vf, r.Settings.DriftFlagC)
		}
		out.SonRows = append(out.SonRows, row)
		out.SonicationDose = append(out.SonicationDose, ss.rs.SonicationDose(st.Number))
	}
	return out
}

func (ss *reviewSession) sonication(num int) *dosemap.Sonication {
	for _, so := range ss.c.Sonications {
		if so.Number == num {
			return so
		}
	}
	return nil
}

// qualityFlags states what the thermometry flagged (rejected frames,
// suspected phase wraps) and, as plain notes, the drift removed, the motion
// measure and the share of invalid voxel-frames. It reports whether any
// flag (not only notes) was raised.
func qualityFlags(q review.SonicationQuality, voxelFrames int, driftLimit float64) ([]string, bool) {
	var f []string
	if n := len(q.FlaggedFrames); n > 0 {
		f = append(f, fmt.Sprintf("%d frame(s) rejected: %s", n, sliceList(q.FlaggedFrames)))
	}
	if q.Wraps > 0 {
		f = append(f, fmt.Sprintf("%d suspected phase wraps", q.Wraps))
	}
	if q.DriftFlagged(driftLimit) {
		if !(driftLimit > 0) {
			driftLimit = review.DefaultDriftFlagC
		}
		f = append(f, fmt.Sprintf("drift %.2f °C removed, above %s °C", math.Abs(q.MaxDriftC), fmtNum(driftLimit)))
	}
	flagged := len(f) > 0
	if q.MaxDriftC != 0 && !math.IsNaN(q.MaxDriftC) && !q.DriftFlagged(driftLimit) {
		f = append(f, fmt.Sprintf("drift ≤ %.2f °C", math.Abs(q.MaxDriftC)))
	}
	if q.MaxMotion > 0 {
		f = append(f, fmt.Sprintf("motion 1−r ≤ %.2g", q.MaxMotion))
	}
	if q.Invalid > 0 && voxelFrames > 0 {
		f = append(f, fmt.Sprintf("invalid %.1f %% of voxel-frames", 100*float64(q.Invalid)/float64(voxelFrames)))
	}
	return f, flagged
}

// sliceList prints 1-based slice or frame numbers compactly: "3–7, 9".
func sliceList(s []int) string {
	if len(s) == 0 {
		return "—"
	}
	out := ""
	for i := 0; i < len(s); {
		j := i
		for j+1 < len(s) && s[j+1] == s[j]+1 {
			j++
		}
		if out != "" {
			out += ", "
		}
		if j > i {
			out += fmt.Sprintf("%d–%d", s[i], s[j])
		} else {
			out += fmt.Sprint(s[i])
		}
		i = j + 1
	}
	return out
}

// doseUnitName is the unit as shown.
func doseUnitName(u string) string {
	switch u {
	case "CEM43":
		return "CEM43 min"
	case "Omega":
		return "Ω"
	}
	return u
}

// Probe implements session.
func (ss *reviewSession) Probe(p dosemap.Vec3, s review.Settings) (*review.Probe, error) {
	return ss.rs.Probe(p, s)
}

// PeakTemperature implements session.
func (ss *reviewSession) PeakTemperature(s review.Settings) (*dosemap.Volume, error) {
	return ss.rs.PeakTemperature(s)
}

package sim

import (
	"fmt"
	"math"
	"sort"
	"time"

	"dosecover/dosemap"
)

// Truth records what was simulated for one case; WriteSession saves it as
// truth.json in the case folder so analyses can be checked against it.
type Truth struct {
	Label       string `json:"label"`
	Version     string `json:"generator_version"`
	Seed        uint64 `json:"seed"`
	Description string `json:"description"`
	PatientName string `json:"patient_name"`
	PatientID   string `json:"patient_id"`

	Phantom   Phantom `json:"phantom"`
	MarginMM  float64 `json:"margin_mm"`
	Threshold float64 `json:"threshold_cem43"`

	FrameOfReferenceUID string `json:"frame_of_reference_uid"`
	StudyUID            string `json:"study_uid"`
	AnatomySeriesUID    string `json:"anatomy_series_uid"`
	StructureSetUID     string `json:"structure_set_uid"`

	Thermometry TruthThermometry  `json:"thermometry"`
	Planned     []PlannedSpot     `json:"planned_spots"`
	Sonications []TruthSonication `json:"sonications"`
	Undelivered []int             `json:"undelivered_spots"` // planned spot numbers never delivered
	Spill       []int             `json:"spill_sonications"` // sonication numbers that landed beyond the margin
	Motion      []Motion          `json:"motion_frames"`

	// From the simulated temperature on the bioheat grid (not from the
	// images): the ground truth an analysis should approach.
	BioheatGrid        string        `json:"bioheat_grid"`
	TargetVolumeMM3    float64       `json:"target_volume_mm3"`
	CoveredFraction    float64       `json:"covered_fraction"` // target fraction at or above Threshold
	Holes              []TruthRegion `json:"holes"`            // under-dosed regions inside the target, largest first
	LethalOutsideMM3   float64       `json:"lethal_outside_margin_mm3"`
	LethalOutsideAvoid float64       `json:"lethal_in_avoid_mm3"`

	// The same figures from the noiseless thermometry: the simulated rise
	// sampled on the thermometry grid (slice-thickness average), added to
	// the base temperature from each series' baseline frames, CEM43 by the
	// trapezoid rule over the frame times. This is what an ideal analysis
	// of the images finds; it differs from the bioheat figures above
	// because thermometry measures change only (residual heat from earlier
	// sonications is invisible), samples every frame interval, and averages
	// over its voxels.
	Measured MeasuredTruth `json:"noiseless_thermometry"`

	Files int `json:"files"`

	// Dose is the cumulative CEM43 of the whole session on the bioheat
	// grid (the continuous field the truth figures come from); not
	// written to truth.json.
	Dose *dosemap.Volume `json:"-"`
	// ChangeDose is the CEM43 an ideal thermometry would measure at every
	// point of the bioheat grid: each sonication's temperature change over
	// its own baseline frames added to the base temperature (thermometry
	// measures change only, so heat left from earlier sonications is not
	// in it), accumulated over its imaged frames; not written to
	// truth.json. ChangeCoveredFraction is the part of the target it
	// covers.
	ChangeDose            *dosemap.Volume `json:"-"`
	ChangeCoveredFraction float64         `json:"change_only_covered_fraction,omitempty"` // sessions on their own planes only (LayoutSlab keeps its truth.json as before)

	// SliceDose and SliceChangeDose are Dose and ChangeDose of the
	// continuous temperature averaged across one thermometry slice around
	// every point (Session.SliceTruth; nil without): thermometry averages
	// the temperature over its slice thickness before any dose is
	// computed, and the dose grows exponentially with temperature, so a
	// 3 mm slice through a focal spot a few mm wide sees markedly less
	// dose than the point it is centred on (partial volume). These are
	// what thermometry of that slice thickness can see at best; not
	// written to truth.json.
	SliceDose, SliceChangeDose *dosemap.Volume `json:"-"`
}

// MeasuredTruth holds dose figures on the thermometry grid; a voxel belongs
// to the target when its centre lies inside the lesion.
type MeasuredTruth struct {
	TargetVoxels     int           `json:"target_voxels"`
	CoveredFraction  float64       `json:"covered_fraction"`
	Holes            []TruthRegion `json:"holes"`
	LethalOutsideMM3 float64       `json:"lethal_outside_margin_mm3"`
	PeakTemp         []float64     `json:"peak_temperature_c"` // per sonication, hottest voxel

	// The same figures with the heat left from earlier sonications
	// counted: the simulated rise itself (not its change from each
	// baseline) added to the base temperature. The difference to the
	// figures above is what hidden residual heat costs the thermometry.
	WithHiddenHeat HiddenHeatTruth `json:"with_hidden_heat"`
}

// HiddenHeatTruth holds dose figures of the noiseless thermometry with the
// hidden residual heat counted.
type HiddenHeatTruth struct {
	CoveredFraction  float64 `json:"covered_fraction"`
	LethalOutsideMM3 float64 `json:"lethal_outside_margin_mm3"`
}

// TruthThermometry records the acquisition and the phase model.
type TruthThermometry struct {
	Geometry       dosemap.Geometry `json:"geometry"`
	FrameInterval  float64          `json:"frame_interval_s"`
	Frames         int              `json:"frames_per_sonication"`
	BaselineFrames int              `json:"baseline_frames"`
	B0             float64          `json:"b0_t"`
	TE             float64          `json:"te_s"`
	Alpha          float64          `json:"alpha_ppm_per_c"`
	Sign           float64          `json:"sign"`
	PhasePerDegree float64          `json:"phase_per_degree_rad"`
	PhaseScale     float64          `json:"phase_rad_per_stored_unit"`
	SNR            float64          `json:"snr"`
	DriftRate      float64          `json:"drift_rad_per_s"`
	DriftGradient  float64          `json:"drift_gradient_rad_per_s_per_100mm"`
	BeamDirection  dosemap.Vec3     `json:"beam_direction"`
	SigmaAxialMM   float64          `json:"focal_sigma_axial_mm"`
	SigmaLateralMM float64          `json:"focal_sigma_lateral_mm"`
	SeriesLayout   string           `json:"series_layout"`
}

// PlannedSpot is one planned focal position.
type PlannedSpot struct {
	Number     int          `json:"number"`
	Position   dosemap.Vec3 `json:"position_mm"`
	Delivered  bool         `json:"delivered"`
	Sonication []int        `json:"sonications,omitempty"`
}

// TruthSonication is one delivered sonication.
type TruthSonication struct {
	Number    int          `json:"number"`
	Planned   int          `json:"planned_spot"`
	Focus     dosemap.Vec3 `json:"focus_mm"`
	Power     float64      `json:"power_w"`
	Duration  float64      `json:"duration_s"`
	Spill     bool         `json:"spill"`
	Start     time.Time    `json:"start"`
	Offset    float64      `json:"offset_s"` // seconds from the session start
	SeriesUID string       `json:"series_uid"`
	Folder    string       `json:"folder"`
	PeakTemp  float64      `json:"peak_temperature_c"`        // hottest bioheat voxel during the imaged frames
	StartTemp float64      `json:"focus_start_temperature_c"` // residual heat at the focus when it began
	// Stacks are the grids the sonication was measured on (one for a
	// moving slab, one per plane otherwise); empty for one shared slab.
	Stacks []dosemap.Geometry `json:"stacks,omitempty"`
	// CoolingS is the unimaged time from the previous sonication's last
	// frame to this one's first frame, s (0 for the first).
	CoolingS float64 `json:"cooling_s"`
	// HiddenRiseC is the rise over the base temperature still present at
	// this sonication's baseline (mean of its baseline frames of the
	// noiseless thermometry, which sees it as zero), largest over the
	// thermometry voxels whose centre lies in the lesion grown by the
	// margin, °C: what a residual heat estimate should find.
	HiddenRiseC float64 `json:"hidden_rise_c"`
}

// TruthRegion is a connected region.
type TruthRegion struct {
	Center    dosemap.Vec3 `json:"center_mm"`
	VolumeMM3 float64      `json:"volume_mm3"`
}

func (s *Session) truth(res *simResult, id ids) *Truth {
	p := s.Thermometry
	t := &Truth{
		Label: s.Label, Version: fmt.Sprintf("%s r%d", dosemap.Version, Revision), Seed: s.Seed, Description: s.Description,
		PatientName: s.PatientName, PatientID: s.PatientID, Phantom: s.Phantom,
		MarginMM: s.MarginMM, Threshold: s.Threshold,
		FrameOfReferenceUID: id.frame, StudyUID: id.study, AnatomySeriesUID: id.anatomySeries, StructureSetUID: id.structInstance,
		Thermometry: TruthThermometry{Geometry: s.ThermometryGeometry(), FrameInterval: p.FrameInterval, Frames: p.Frames,
			BaselineFrames: p.BaselineFrames, B0: p.B0, TE: p.TE, Alpha: p.Alpha, Sign: p.Sign,
			PhasePerDegree: p.PhasePerDegree(), PhaseScale: PhaseScale, SNR: p.SNR,
			DriftRate: p.DriftRate, DriftGradient: p.DriftGradient, BeamDirection: p.BeamDirection.Unit(),
			SigmaAxialMM: p.SigmaAxial, SigmaLateralMM: p.SigmaLateral,
			SeriesLayout: "one series per sonication holding magnitude and phase images (ImageType value 3 M or P, ComplexImageComponent MAGNITUDE or PHASE)"},
		Motion:      append([]Motion(nil), s.Motion...),
		BioheatGrid: res.grid.String(),
	}
	for n, q := range s.Planned {
		t.Planned = append(t.Planned, PlannedSpot{Number: n + 1, Position: q})
	}
	offset := 0.0
	for n, so := range s.Sonications {
		start := s.Start.Add(time.Duration(offset * float64(time.Second)))
		ts := TruthSonication{Number: n + 1, Planned: so.Planned, Focus: so.Focus, Power: so.Power, Duration: so.Duration,
			Spill: so.Spill, Start: start, Offset: offset, SeriesUID: id.thermoSeries(n + 1),
			Folder: fmt.Sprintf(sonicationFolder, n+1), PeakTemp: res.peak[n], StartTemp: res.before[n],
			HiddenRiseC: s.hiddenRise(res.frames[n])}
		if n > 0 {
			ts.CoolingS = s.Sonications[n-1].Cooling
		}
		t.Sonications = append(t.Sonications, ts)
		if so.Spill {
			t.Spill = append(t.Spill, n+1)
		}
		if so.Planned > 0 {
			ps := &t.Planned[so.Planned-1]
			ps.Delivered = true
			ps.Sonication = append(ps.Sonication, n+1)
		}
		offset += float64(p.Frames-1)*p.FrameInterval + so.Cooling
	}
	for _, ps := range t.Planned {
		if !ps.Delivered {
			t.Undelivered = append(t.Undelivered, ps.Number)
		}
	}
	// Dose truth on the bioheat grid.
	g := res.grid
	vox := g.VoxelVolume()
	lesion := s.Phantom.Lesion
	grown := lesion.Grown(s.MarginMM)
	inTarget := make([]bool, g.Len())
	var nTarget, nCovered int
	for n, d := range res.dose {
		i, j, k := g.IJK(n)
		q := g.Point(float64(i), float64(j), float64(k))
		lethal := d >= s.Threshold
		if lesion.Contains(q) {
			nTarget++
			if lethal {
				nCovered++
			} else {
				inTarget[n] = true // under-dosed target voxel
			}
		} else if lethal && !grown.Contains(q) {
			t.LethalOutsideMM3 += vox
		}
		if lethal && s.Phantom.Avoid.Contains(q) {
			t.LethalOutsideAvoid += vox
		}
	}
	t.TargetVolumeMM3 = float64(nTarget) * vox
	if nTarget > 0 {
		t.CoveredFraction = float64(nCovered) / float64(nTarget)
	}
	for _, r := range components(g, inTarget) {
		if r.VolumeMM3 >= 8 { // ignore specks of a few voxels on the boundary
			t.Holes = append(t.Holes, r)
		}
	}
	if s.Layout == LayoutSlab {
		t.Measured = s.measuredTruth(res)
	}
	t.Thermometry.SeriesLayout = s.Layout.seriesLayout()
	t.Dose = &dosemap.Volume{Geometry: g, Data: make([]float32, g.Len())}
	t.ChangeDose = &dosemap.Volume{Geometry: g, Data: make([]float32, g.Len())}
	nChange := 0
	for n, d := range res.dose {
		t.Dose.Data[n] = float32(d)
		t.ChangeDose.Data[n] = float32(res.change[n])
		i, j, k := g.IJK(n)
		if res.change[n] >= s.Threshold && lesion.Contains(g.Point(float64(i), float64(j), float64(k))) {
			nChange++
		}
	}
	if res.sliceDose != nil {
		t.SliceDose = &dosemap.Volume{Geometry: g, Data: make([]float32, g.Len())}
		t.SliceChangeDose = &dosemap.Volume{Geometry: g, Data: make([]float32, g.Len())}
		for n := range res.sliceDose {
			t.SliceDose.Data[n] = float32(res.sliceDose[n])
			t.SliceChangeDose.Data[n] = float32(res.sliceChange[n])
		}
	}
	if nTarget > 0 && s.Layout != LayoutSlab {
		t.ChangeCoveredFraction = float64(nChange) / float64(nTarget)
	}
	return t
}

// hiddenRise returns the largest mean rise over the baseline frames of one
// sonication's noiseless frames among the thermometry voxels whose centre
// lies in the lesion grown by the margin.
func (s *Session) hiddenRise(frames [][]float32) float64 {
	p := s.Thermometry
	g := s.ThermometryGeometry()
	grown := s.Phantom.Lesion.Grown(s.MarginMM)
	best := 0.0
	for v := 0; v < g.Len(); v++ {
		i, j, k := g.IJK(v)
		if !grown.Contains(g.Point(float64(i), float64(j), float64(k))) {
			continue
		}
		var b float64
		for f := 0; f < p.BaselineFrames; f++ {
			b += float64(frames[f][v])
		}
		best = math.Max(best, b/float64(p.BaselineFrames))
	}
	return math.Round(best*1000) / 1000
}

// measuredTruth computes MeasuredTruth from the noiseless frames.
func (s *Session) measuredTruth(res *simResult) MeasuredTruth {
	m := s.thermometryTruth(res, false)
	h := s.thermometryTruth(res, true)
	m.WithHiddenHeat = HiddenHeatTruth{CoveredFraction: h.CoveredFraction, LethalOutsideMM3: h.LethalOutsideMM3}
	return m
}

// thermometryTruth computes the MeasuredTruth figures from the noiseless
// frames: each frame's rise taken from its series' baseline (what PRF
// thermometry measures) or, with hidden, the rise itself.
func (s *Session) thermometryTruth(res *simResult, hidden bool) MeasuredTruth {
	p := s.Thermometry
	g := s.ThermometryGeometry()
	base := s.Phantom.BodyTemp
	dose := make([]float64, g.Len())
	var m MeasuredTruth
	rate := func(T float64) float64 { // CEM43 per second (Sapareto & Dewey 1984)
		if T >= 43 {
			return math.Exp2(T-43) / 60
		}
		return math.Exp2(-2*(43-T)) / 60
	}
	for _, frames := range res.frames {
		peak := math.Inf(-1)
		for v := range dose {
			var b float64
			for f := 0; f < p.BaselineFrames; f++ {
				b += float64(frames[f][v])
			}
			b /= float64(p.BaselineFrames)
			if hidden {
				b = 0
			}
			prev := base + float64(frames[0][v]) - b
			for f := 1; f < len(frames); f++ {
				T := base + float64(frames[f][v]) - b
				dose[v] += 0.5 * (rate(prev) + rate(T)) * p.FrameInterval
				prev = T
				peak = math.Max(peak, T)
			}
		}
		m.PeakTemp = append(m.PeakTemp, math.Round(peak*100)/100)
	}
	lesion := s.Phantom.Lesion
	grown := lesion.Grown(s.MarginMM)
	under := make([]bool, g.Len())
	covered := 0
	for v, d := range dose {
		i, j, k := g.IJK(v)
		q := g.Point(float64(i), float64(j), float64(k))
		lethal := d >= s.Threshold
		switch {
		case lesion.Contains(q):
			m.TargetVoxels++
			if lethal {
				covered++
			} else {
				under[v] = true
			}
		case lethal && !grown.Contains(q):
			m.LethalOutsideMM3 += g.VoxelVolume()
		}
	}
	if m.TargetVoxels > 0 {
		m.CoveredFraction = float64(covered) / float64(m.TargetVoxels)
	}
	for _, r := range components(g, under) {
		if r.VolumeMM3 >= 2*g.VoxelVolume() {
			m.Holes = append(m.Holes, r)
		}
	}
	return m
}

// components returns the 6-connected regions of mask with their centroids.
func components(g dosemap.Geometry, mask []bool) []TruthRegion {
	seen := make([]bool, len(mask))
	var out []TruthRegion
	var stack []int
	for start, m := range mask {
		if !m || seen[start] {
			continue
		}
		var sum dosemap.Vec3
		cnt := 0
		stack = append(stack[:0], start)
		seen[start] = true
		for len(stack) > 0 {
			n := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			i, j, k := g.IJK(n)
			sum = sum.Add(g.Point(float64(i), float64(j), float64(k)))
			cnt++
			for _, d := range [6][3]int{{1, 0, 0}, {-1, 0, 0}, {0, 1, 0}, {0, -1, 0}, {0, 0, 1}, {0, 0, -1}} {
				a, b, c := i+d[0], j+d[1], k+d[2]
				if !g.Contains(a, b, c) {
					continue
				}
				m := g.Index(a, b, c)
				if mask[m] && !seen[m] {
					seen[m] = true
					stack = append(stack, m)
				}
			}
		}
		out = append(out, TruthRegion{Center: sum.Scale(1 / float64(cnt)), VolumeMM3: float64(cnt) * g.VoxelVolume()})
	}
	sort.SliceStable(out, func(a, b int) bool { return out[a].VolumeMM3 > out[b].VolumeMM3 })
	for n := range out {
		for ax := 0; ax < 3; ax++ {
			out[n].Center[ax] = math.Round(out[n].Center[ax]*100) / 100
		}
	}
	return out
}

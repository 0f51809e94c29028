package report

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"image"
	"math"
	"strings"
	"time"

	"dosecover/dosemap"
	deidentify "dosecover/dosemap/deid"
	"dosecover/review"
	"dosecover/review/view"
)

// Options are the parts of a report that do not come from the analysis.
type Options struct {
	Deidentify   bool      // hide identity: neutral case label, no scan date, generic sonication labels
	Reviewer     string    // who reviewed ("" not given)
	ReviewDate   time.Time // zero: now
	InputsSHA256 string    // see review.HashInputs
	PanelPixels  int       // side of each image panel in pixels; 0: 480
	// SignOffs are the sign-offs of the case: the report shows the one
	// made on this very analysis (input hash, study, settings, left-out
	// sonications and figures), or says it is not signed off for these
	// settings and what differs from the last one.
	SignOffs []review.SignOff
	// Study is the StudyInstanceUID of the study analysed ("" unknown),
	// which a sign-off must name too.
	Study string
}

// DeidentifiedLabel returns the neutral label a de-identified report shows
// for a case: "Teaching case " and eight hex digits of SHA-256 over the
// original label and the inputs' hash, so different cases get different
// labels and the label reveals nothing of the original.
func DeidentifiedLabel(label, inputsSHA256 string) string {
	h := sha256.Sum256([]byte(label + "\x00" + inputsSHA256))
	return "Teaching case " + strings.ToUpper(hex.EncodeToString(h[:4]))
}

// FromResult fills a report Input from the case c and its analysis r: all
// facts, curves and tables, the three image panels (rendered with
// review/view), the methods block and, as "analysis" in the metrics JSON,
// the analysis' own JSON (with identity removed when opt.Deidentify). It is
// the one place that maps the analysis onto the report.
func FromResult(c *dosemap.Case, r *review.Result, opt Options) (*Input, error) {
	if c == nil || r == nil {
		return nil, fmt.Errorf("report: no case or no analysis")
	}
	in := &Input{
		CaseLabel:    c.Label,
		Deidentified: opt.Deidentify,
		ReviewDate:   opt.ReviewDate,
		Reviewer:     opt.Reviewer,
		InputsSHA256: opt.InputsSHA256,
		Software:     "dosecover " + dosemap.Version,
		Cautions:     nil, // DefaultCautions
	}
	if st := review.SignOffFor(opt.SignOffs, opt.InputsSHA256, opt.Study, r); st.Last != nil {
		in.SignOff = st.Line(opt.Deidentify)
		if st.Valid != nil {
			in.SignOffComment = hide(st.Valid.Comment, c, opt.Deidentify)
		}
	}
	if in.ReviewDate.IsZero() {
		in.ReviewDate = time.Now().UTC().Truncate(time.Second)
	}
	if opt.Deidentify {
		in.CaseLabel = DeidentifiedLabel(c.Label, opt.InputsSHA256)
	} else if d := c.Patient.StudyDate; len(d) == 8 {
		in.ScanDate = d[:4] + "-" + d[4:6] + "-" + d[6:]
	}
	unit := r.DoseUnit
	if unit == "CEM43" {
		unit = "CEM43 min"
	}
	f := Facts{
		Model: r.Model, DoseUnit: unit, Threshold: r.Threshold, MarginMM: r.MarginMM, TargetName: r.Target,
		TargetVolumeML: r.TargetVolumeML, Covered: val(r.CoveredFraction),
		CoveredLow: val(r.CoveredFractionP05), CoveredHigh: val(r.CoveredFractionP95),
		CoveredOfTarget: r.CoveredFractionOfTarget, NotMonitored: r.NotMonitoredFraction,
		LethalML: r.LethalVolumeML, OutsideMarginML: r.OutsideMarginLethalML,
		D98: val(r.D98), D50: val(r.D50), D2: val(r.D2),
	}
	switch strings.ToLower(r.Model) {
	case "cem43":
		f.Model = "CEM43 (Sapareto & Dewey 1984)"
	case "arrhenius":
		f.Model = "Arrhenius damage integral (Henriques & Moritz 1947)"
	}
	if r.Trials > 0 {
		f.BandLabel = fmt.Sprintf("5th-95th percentile, %d Monte Carlo trials", r.Trials)
	}
	for _, h := range r.Holes {
		f.Holes = append(f.Holes, Region{VolumeML: h.VolumeMM3 / 1000, DepthMM: h.DepthMM})
	}
	for _, cl := range r.OutsideClusters {
		f.Outside = append(f.Outside, Region{VolumeML: cl.VolumeMM3 / 1000, DepthMM: cl.MaxDistanceMM})
	}
	f.TargetName = hide(f.TargetName, c, opt.Deidentify)
	for _, a := range r.Avoid {
		f.Avoid = append(f.Avoid, AvoidRow{Name: hide(a.Name, c, opt.Deidentify), LethalML: a.LethalVolumeMM3 / 1000, MaxDose: val(a.PeakDose)})
	}
	if a := r.AsMeasured; a != nil {
		f.AsMeasured = &AsMeasuredFacts{Covered: val(a.CoveredFraction), CoveredOfTarget: a.CoveredFractionOfTarget, OutsideMarginML: a.OutsideMarginLethalML}
	}
	in.Facts = f
	if r.Threshold > 0 {
		// The window's scale and colour bar (view.WashScale, view.WashBar).
		ds := view.WashScale(r.Threshold)
		in.Wash = &Wash{Floor: ds.Floor, Ceiling: ds.Ceiling, Lethal: r.Threshold}
	}

	for n, d := range r.DVH.Dose {
		if n < len(r.DVH.Target) && r.CoveredFraction != nil { // no curve of an unmonitored target
			in.DVH = append(in.DVH, CurvePoint{X: d, Y: r.DVH.Target[n], Low: math.NaN(), High: math.NaN()})
		}
	}
	for _, p := range r.CoverageVsThreshold {
		if p.CoveredFraction != nil { // no curve of an unmonitored target
			in.CoverageVsThreshold = append(in.CoverageVsThreshold, CurvePoint{X: p.Threshold, Y: *p.CoveredFraction, Low: math.NaN(), High: math.NaN()})
		}
	}

	quality := map[int]review.SonicationQuality{}
	for _, q := range r.Quality {
		quality[q.Sonication] = q
	}
	q := Quality{MaxMotion: math.NaN(), MaxDriftC: math.NaN(), MinSNR: math.NaN()}
	for _, s := range r.Sonications {
		sq := quality[s.Number]
		label := s.Label
		if opt.Deidentify || label == "" {
			label = fmt.Sprintf("sonication %d", s.Number)
		}
		in.Sonications = append(in.Sonications, SonicationRow{
			Number: s.Number, Label: label, Frames: len(sq.Frames),
			PeakC: val(s.PeakTempC), PeakDose: s.PeakDose, LethalML: s.LethalAddedML,
			AddedCoverage: val(s.AddedCoverage), OutsideML: s.OutsideAddedML,
			Flagged: len(sq.FlaggedFrames), Excluded: s.Excluded,
			DriftFlagged: sq.DriftFlagged(r.Settings.DriftFlagC),
			CoolingS:     val(s.CoolingS), ResidualC: val(s.ResidualRiseC),
		})
		if sq.DriftFlagged(r.Settings.DriftFlagC) {
			q.DriftFlagged = append(q.DriftFlagged, s.Number)
		}
	}
	q.DriftFlagC = r.Settings.DriftFlagC
	if !(q.DriftFlagC > 0) {
		q.DriftFlagC = review.DefaultDriftFlagC
	}
	for _, sq := range r.Quality {
		q.Frames += len(sq.Frames)
		q.Flagged += len(sq.FlaggedFrames)
		q.Wraps += sq.Wraps
		q.Invalid += sq.Invalid
		if len(sq.Frames) > 0 {
			q.MaxMotion = nanMax(q.MaxMotion, sq.MaxMotion)
			q.MaxDriftC = nanMax(q.MaxDriftC, sq.MaxDriftC)
		}
		if sq.MinSNR != nil {
			q.MinSNR = nanMin(q.MinSNR, *sq.MinSNR)
		}
		for fn, fr := range sq.Frames {
			if fr.Flagged && fr.Note != "" {
				q.Notes = append(q.Notes, fmt.Sprintf("sonication %d frame %d: %s", sq.Sonication, fn+1, fr.Note))
			}
		}
	}
	for _, w := range r.Warnings {
		q.Notes = append(q.Notes, hide(w, c, opt.Deidentify))
	}
	in.Quality = q
	in.Methods = methods(c, r, opt)

	// The analysis' own JSON, with identity removed when asked.
	rr := r
	if opt.Deidentify {
		rr = DeidentifyResult(c, r, in.CaseLabel)
	}
	var buf bytes.Buffer
	if err := rr.WriteJSON(&buf); err != nil {
		return nil, fmt.Errorf("report: encoding the analysis: %w", err)
	}
	in.Analysis = json.RawMessage(bytes.TrimSpace(buf.Bytes()))

	px := opt.PanelPixels
	if px <= 0 {
		px = 480
	}
	panels, err := Panels(c, r, px)
	if err != nil {
		return nil, err
	}
	in.Panels = panels
	return in, nil
}

// DeidentifyResult returns a shallow copy of r for output without
// identity: the case label replaced by label (see DeidentifiedLabel), the
// sonications named by number, the study UID dropped, and the patient's
// name, ID, birth date and institution, the case label and the sonication
// labels of c blanked out of the target and avoid structure names and the
// warnings. The grids are
// shared with r.
func DeidentifyResult(c *dosemap.Case, r *review.Result, label string) *review.Result {
	rr := *r
	rr.Case = label
	rr.StudyUID = "" // a UID of the original study (PS3.15 Annex E replaces UIDs)
	rr.Sonications = append([]review.SonicationStats(nil), r.Sonications...)
	for n := range rr.Sonications {
		rr.Sonications[n].Label = fmt.Sprintf("sonication %d", rr.Sonications[n].Number)
	}
	rr.Target = hide(r.Target, c, true)
	rr.Avoid = append([]review.AvoidDose(nil), r.Avoid...)
	for n := range rr.Avoid {
		rr.Avoid[n].Name = hide(rr.Avoid[n].Name, c, true)
	}
	rr.Warnings = nil
	for _, w := range r.Warnings {
		rr.Warnings = append(rr.Warnings, hide(w, c, true))
	}
	return &rr
}

// hide replaces the case label and the sonication labels of c in s when
// de-identifying.
func hide(s string, c *dosemap.Case, deid bool) string {
	if !deid {
		return s
	}
	if c.Label != "" {
		s = strings.ReplaceAll(s, c.Label, "the case")
	}
	for _, so := range c.Sonications {
		if so.Label != "" {
			s = strings.ReplaceAll(s, so.Label, fmt.Sprintf("sonication %d", so.Number))
		}
	}
	// Identity of the patient wherever it appears (a structure or a
	// series named after the patient), case-insensitively, byte for byte
	// (names in Latin-1 are not valid UTF-8).
	p := c.Patient
	return deidentify.Blank(s, p.Name, p.ID, p.BirthDate, p.Institution)
}

func val(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

func nanMax(a, b float64) float64 {
	if math.IsNaN(a) {
		return b
	}
	if math.IsNaN(b) {
		return a
	}
	return math.Max(a, b)
}

func nanMin(a, b float64) float64 {
	if math.IsNaN(a) {
		return b
	}
	if math.IsNaN(b) {
		return a
	}
	return math.Min(a, b)
}

// methods lists the dose model and parameters, the thermometry settings and
// the analysis settings.
func methods(c *dosemap.Case, r *review.Result, opt Options) []Setting {
	var ms []Setting
	switch strings.ToLower(r.Model) {
	case "arrhenius":
		a := r.Settings.Arrhenius
		if a.A == 0 || a.Ea == 0 {
			a = dosemap.DefaultArrhenius()
		}
		tissue := a.Tissue
		if tissue == "" {
			tissue = "parameters given"
		}
		ms = append(ms, Setting{"Dose model", fmt.Sprintf("Arrhenius (%s), A %.4g /s, Ea %.5g J/mol", tissue, a.A, a.Ea)})
	default:
		// The parameters the analysis used; zero fields take the
		// Sapareto-Dewey defaults, as the dose engine does.
		m, d := r.Settings.CEM43, dosemap.DefaultCEM43()
		if m.Break == 0 {
			m.Break = d.Break
		}
		if m.RAbove == 0 {
			m.RAbove = d.RAbove
		}
		if m.RBelow == 0 {
			m.RBelow = d.RBelow
		}
		rule := "trapezoid rule"
		if m.Rule == dosemap.RuleRectangle {
			rule = "rectangle rule"
		}
		ms = append(ms, Setting{"Dose model", fmt.Sprintf("CEM43, R %.4g at or above / %.4g below %.4g °C, %s", m.RAbove, m.RBelow, m.Break, rule)})
	}
	measured := false
	for _, so := range c.Sonications {
		measured = measured || so.HasPhase() || so.Temperature != nil
	}
	if !measured {
		ms = append(ms, Setting{"Thermometry", "not used: the case holds ready dose maps"})
		return append(ms, analysisSettings(r)...)
	}
	ti := r.Thermometry
	ms = append(ms, Setting{"PRF alpha", fmt.Sprintf("%.4f ppm/°C", ti.AlphaPPMPerC)})
	ms = append(ms, Setting{"B0 / TE", fieldAndEcho(c, ti)})
	drift := ti.Drift
	switch strings.ToLower(drift) {
	case "", "none":
		drift = "none"
	case "polynomial":
		drift = fmt.Sprintf("polynomial, order %d", ti.DriftOrder)
	}
	if drift != "none" && ti.Reference != "" {
		drift += ", " + ti.Reference + " reference"
	}
	ms = append(ms,
		Setting{"Drift correction", drift},
		Setting{"Baseline frames", fmt.Sprintf("%d", ti.BaselineFrames)},
		Setting{"Body temperature", fmt.Sprintf("%.1f °C", ti.BodyTempC)},
	)
	return append(ms, analysisSettings(r)...)
}

// analysisSettings lists the settings of the analysis itself.
func analysisSettings(r *review.Result) []Setting {
	var ms []Setting
	ms = append(ms, Setting{"Threshold, margin", fmt.Sprintf("%s %s, %.1f mm", dose(r.Threshold), r.DoseUnit, r.MarginMM)})
	if r.Trials > 0 {
		ms = append(ms, Setting{"Uncertainty", fmt.Sprintf("Monte Carlo, %d trials, seed %d", r.Trials, r.Settings.Seed)})
	} else {
		ms = append(ms, Setting{"Uncertainty", "not computed"})
	}
	ex := "none"
	if len(r.Settings.Excluded) > 0 {
		ex = strings.Trim(strings.Join(strings.Fields(fmt.Sprint(r.Settings.Excluded)), ", "), "[]")
	}
	ms = append(ms, Setting{"Excluded sonications", ex})
	if r.CarryOver {
		ms = append(ms, Setting{"Residual heat", "estimated from each earlier sonication's cooling (Pennes 1948 decay form) and added to the temperatures before dose (carry-over on)"})
	} else {
		ms = append(ms, Setting{"Residual heat", fmt.Sprintf("estimated, not added to the dose (carry-over off); warning above %g °C", r.Settings.ResidualWarnC)})
	}
	g := r.Grid
	ms = append(ms, Setting{"Analysis grid", fmt.Sprintf("%d×%d×%d voxels of %.3g×%.3g×%.3g mm", g.Size[0], g.Size[1], g.Size[2], g.SpacingMM[0], g.SpacingMM[1], g.SpacingMM[2])})
	return ms
}

// fieldAndEcho describes B0 and TE: the override of the analysis, or the
// values of the sonications (a range when they differ).
func fieldAndEcho(c *dosemap.Case, ti review.ThermometryInfo) string {
	b0lo, b0hi, telo, tehi := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	for _, s := range c.Sonications {
		if s.Dose != nil && !s.HasPhase() {
			continue
		}
		b, t := s.B0, s.TE
		if ti.B0T != nil {
			b = *ti.B0T
		}
		if ti.TES != nil {
			t = *ti.TES
		}
		if b > 0 {
			b0lo, b0hi = math.Min(b0lo, b), math.Max(b0hi, b)
		}
		if t > 0 {
			telo, tehi = math.Min(telo, t), math.Max(tehi, t)
		}
	}
	rng := func(lo, hi, scale float64, format, unit string) string {
		if math.IsInf(lo, 1) {
			return "n/a"
		}
		if hi-lo < 1e-9 {
			return fmt.Sprintf(format, lo*scale) + " " + unit
		}
		return fmt.Sprintf(format+" to "+format, lo*scale, hi*scale) + " " + unit
	}
	return rng(b0lo, b0hi, 1, "%.2f", "T") + " / " + rng(telo, tehi, 1000, "%.1f", "ms")
}

// Panels renders the three image panels of the report: the plane through
// the largest target cross-section, through the largest hole and through
// the largest lethal cluster outside the margin. Without a hole the second
// panel is a reformat across the slices through the target centre; without
// a cluster the third is the other reformat. When the sonications were
// measured on planes of their own, the three panels are acquired slices
// instead: each the one that measured most of the target, the hole or the
// cluster (in the grid's orientation when one of those holds it), so that
// no panel shows a plane whose dose is unknown. There the panels without
// a hole or a cluster show the measured slice that measured most of the
// target among those not in the plane of a panel before (across those
// planes when one such holds the target); when no other measured slice
// holds the target they show the reformat and say in the caption that it
// is not a measured plane. Each panel is px pixels wide and PanelAspect as
// high.
func Panels(c *dosemap.Case, r *review.Result, px int) ([]Panel, error) {
	if r.Dose == nil || r.TargetMask == nil {
		return nil, fmt.Errorf("report: the analysis carries no dose or target grid to draw")
	}
	tg := r.TargetMask.Geometry
	// Target: the slice of the analysis grid with the largest cross-section,
	// the centroid of that cross-section and of the whole target, and the
	// target's extent.
	best, bestK := 0.0, 0
	var cen dosemap.Vec3
	var wsum float64
	lo := dosemap.Vec3{math.Inf(1), math.Inf(1), math.Inf(1)}
	hi := dosemap.Vec3{math.Inf(-1), math.Inf(-1), math.Inf(-1)}
	area := make([]float64, tg.Slices)
	for n, v := range r.TargetMask.Data {
		if !(v > 0) {
			continue
		}
		i, j, k := tg.IJK(n)
		area[k] += float64(v)
		p := tg.Point(float64(i), float64(j), float64(k))
		cen = cen.Add(p.Scale(float64(v)))
		wsum += float64(v)
		for a := 0; a < 3; a++ {
			lo[a], hi[a] = math.Min(lo[a], p[a]), math.Max(hi[a], p[a])
		}
	}
	if wsum == 0 {
		return nil, fmt.Errorf("report: the target mask is empty")
	}
	cen = cen.Scale(1 / wsum)
	for k, a := range area {
		if a > best {
			best, bestK = a, k
		}
	}
	var sec dosemap.Vec3
	var sw float64
	for j := 0; j < tg.Rows; j++ {
		for i := 0; i < tg.Cols; i++ {
			if v := r.TargetMask.Data[tg.Index(i, j, bestK)]; v > 0 {
				sec = sec.Add(tg.Point(float64(i), float64(j), float64(bestK)).Scale(float64(v)))
				sw += float64(v)
			}
		}
	}
	sec = sec.Scale(1 / sw)
	extent := hi.Sub(lo).Norm() + 2*r.MarginMM + 10
	extent = math.Max(extent, 30)

	sc := baseScene(c, r)
	// Planes span the anatomy when it shares the thermometry's slice
	// orientation (the usual case), so zoomed-out panels keep their
	// surroundings; else the thermometry grid.
	grid := r.Dose.Geometry
	if a := c.Anatomy; a != nil && math.Abs(a.Normal.Dot(grid.Normal)) > 0.999 && math.Abs(a.Row.Dot(grid.Row)) > 0.999 {
		grid = a.Geometry
	}
	pixelMM := math.Min(r.Dose.Spacing[0], r.Dose.Spacing[1]) / 2
	if c.Anatomy != nil {
		pixelMM = math.Min(pixelMM, math.Min(c.Anatomy.Spacing[0], c.Anatomy.Spacing[1]))
	}
	pixelMM = math.Max(pixelMM, extent/float64(px)) // no finer than the display

	render := func(title string, pl view.Plane, q, centre dosemap.Vec3, ext float64, what string) Panel {
		s := sc
		s.Plane = pl
		cx, cy := s.Plane.Pixel(centre)
		v := view.View{Width: px, Height: int(math.Round(float64(px) * PanelAspect)), Zoom: float64(px) / ext, Centre: view.Point{X: cx, Y: cy}}
		img, err := view.Render(&s, v)
		if err != nil {
			// The page is still made; the panel says why it is empty.
			return Panel{Title: title, Caption: "not drawn: " + err.Error()}
		}
		return Panel{Title: title, Caption: planeCaption(s.Plane, q) + what, Image: image.Image(img), plane: s.Plane}
	}
	// On a session measured on planes of its own, each panel is drawn on
	// the acquired slice that measured most of what it shows (the target,
	// the hole, the cluster), so its dose is measured, not unknown.
	own := ownPlanes(c, r)
	// choose returns the measured slice for a panel showing region:
	// slices parallel to the grid's own first (the panels keep the usual
	// orientation when a measured plane of it holds the region), else any,
	// leaving out the plane of skip while another plane holds the region.
	choose := func(q dosemap.Vec3, region *dosemap.Volume, weight func(float32) float64, skip []measuredSlice) *measuredSlice {
		if own == nil || region == nil {
			return nil
		}
		for _, sk := range [][]measuredSlice{skip, nil} {
			for _, cand := range [][]measuredSlice{parallelTo(own, grid.Normal), own} {
				if ms, ok := bestMeasuredSlice(cand, region, weight, q, sk); ok && ms.Voxels > 0 {
					return &ms
				}
			}
		}
		if ms, ok := bestMeasuredSlice(own, region, weight, q, nil); ok {
			return &ms // the nearest measured plane; none holds the region
		}
		return nil
	}
	panel := func(title string, o view.Orientation, q, centre dosemap.Vec3, ext float64, what string, ms *measuredSlice) (Panel, error) {
		if ms != nil {
			pl, err := view.SlicePlane(ms.Stack, ms.K, grid, pixelMM)
			if err != nil {
				// Said, not drawn as if it were measured.
				what += "; reformat, not the measured plane (" + err.Error() + ")"
			} else {
				qq := q.Sub(pl.Normal().Scale(pl.Distance(q)))
				by := fmt.Sprintf("sonication %d", ms.Sonication)
				if sh := sharing(own, *ms); len(sh) > 1 {
					by = fmt.Sprintf("%d sonications", len(sh))
				}
				note := "; measured plane of " + by
				if ms.Voxels == 0 {
					note = fmt.Sprintf("; nearest measured plane (of %s), %.1f mm away", by, ms.DistanceMM)
				}
				return render(title, pl, qq, centre, ext, what+note), nil
			}
		}
		return render(title, view.PlaneThrough(grid, o, q, pixelMM), q, centre, ext, what), nil
	}
	// The hole's plane is chosen first; the target panel takes another
	// plane when one holds the target, so the two panels differ.
	var holeMS *measuredSlice
	if len(r.Holes) > 0 {
		holeMS = choose(dosemap.Vec3(r.Holes[0].CentroidMM), r.HoleLabels, labelWeight(1), nil)
	}
	// shown: the measured planes of the panels drawn so far, through
	// their region.
	var shown []measuredSlice
	if holeMS != nil && holeMS.Voxels > 0 {
		shown = append(shown, *holeMS)
	}
	var out []Panel
	targetMS := choose(sec, r.TargetMask, fractionWeight, shown)
	p, err := panel("Largest target cross-section", view.Acquisition, sec, cen, extent, "", targetMS)
	if err != nil {
		return nil, err
	}
	out = append(out, p)
	if targetMS != nil && targetMS.Voxels > 0 {
		shown = append(shown, *targetMS)
	}
	// fallback draws a panel with no hole or cluster to show: the
	// reformat o through the target centre on one shared slab; on planes
	// of their own the measured slice that measured most of the target
	// among those not in a plane shown before, across the planes shown
	// when one such holds the target, or else the reformat (o, or another
	// orientation when o's would repeat a plane shown), saying that its
	// dose is known only where measured planes cross it.
	fallback := func(title string, o view.Orientation) (Panel, error) {
		if own == nil {
			return panel(title, o, cen, cen, extent, "; through the target centre", nil)
		}
		for _, cand := range [][]measuredSlice{notParallelTo(own, shown), own} {
			if ms, ok := bestMeasuredSlice(cand, r.TargetMask, fractionWeight, cen, shown); ok && ms.Voxels > 0 {
				shown = append(shown, ms)
				return panel(title, o, cen, cen, extent, "; through the target", &ms)
			}
		}
		for _, oo := range []view.Orientation{o, view.RowNormal, view.ColNormal, view.Acquisition} {
			if !inShown(shown, view.PlaneThrough(grid, oo, cen, pixelMM)) {
				o = oo
				break
			}
		}
		return panel(title, o, cen, cen, extent, "; through the target centre; reformat, not a measured plane: "+
			"no other measured plane holds the target, so dose is known only where measured planes cross it", nil)
	}
	if len(r.Holes) > 0 {
		h := r.Holes[0]
		hc := dosemap.Vec3(h.CentroidMM)
		p, err = panel("Largest hole", view.Acquisition, hc, cen, extent,
			fmt.Sprintf("; hole %.3f mL, %.1f mm deep", h.VolumeMM3/1000, h.DepthMM), holeMS)
	} else {
		title := "No hole: across the slices"
		if own != nil {
			title = "No hole: another plane through the target"
		}
		p, err = fallback(title, view.RowNormal)
	}
	if err != nil {
		return nil, err
	}
	out = append(out, p)
	if len(r.OutsideClusters) > 0 {
		cl := r.OutsideClusters[0]
		cc := dosemap.Vec3(cl.CentroidMM)
		mid := cen.Add(cc).Scale(0.5)
		ext := math.Max(extent, 2*cc.Sub(cen).Norm()+20)
		p, err = panel("Largest lethal cluster outside margin", view.Acquisition, cc, mid, ext,
			fmt.Sprintf("; %.3f mL, up to %.1f mm beyond target", cl.VolumeMM3/1000, cl.MaxDistanceMM), choose(cc, r.SpillLabels, labelWeight(1), nil))
	} else {
		p, err = fallback("No lethal dose outside margin", view.ColNormal)
	}
	if err != nil {
		return nil, err
	}
	return append(out, p), nil
}

// baseScene holds the layers shared by the three panels.
func baseScene(c *dosemap.Case, r *review.Result) view.Scene {
	s := view.Scene{
		Anatomy:     c.Anatomy,
		Window:      view.Window{Center: c.WindowCenter, Width: c.WindowWidth},
		Dose:        r.Dose,
		Lethal:      r.Threshold,
		Annotations: true,
	}
	if r.Threshold > 0 {
		s.Scale = view.WashScale(r.Threshold)
	}
	if t := c.Target(); t != nil {
		s.Target = view.Region{Structure: t}
	}
	for n := range c.Structures {
		if c.Structures[n].Role == dosemap.RoleAvoid {
			s.Avoid = append(s.Avoid, view.Region{Structure: &c.Structures[n]})
		}
	}
	if r.MarginMask != nil {
		s.Margin = view.Region{Mask: r.MarginMask}
	}
	if r.HoleLabels != nil {
		s.Holes = view.Region{Mask: r.HoleLabels}
	}
	if r.SpillLabels != nil {
		s.Spill = view.Region{Mask: r.SpillLabels}
	}
	// Not monitored: unmeasured voxels within target plus margin.
	if r.Lethal != nil && r.MarginMask != nil && r.Lethal.Geometry == r.MarginMask.Geometry {
		nm := dosemap.NewVolume(r.Lethal.Geometry)
		any := false
		for n, v := range r.Lethal.Data {
			if v != v && r.MarginMask.Data[n] >= 0.5 {
				nm.Data[n] = 1
				any = true
			}
		}
		if any {
			s.NotMonitored = view.Region{Mask: nm}
		}
	}
	return s
}

// planeCaption names the plane: axial, coronal or sagittal with its
// position when its normal is within about 10° of a patient axis, else
// "oblique" with the point it passes through.
func planeCaption(p view.Plane, q dosemap.Vec3) string {
	n := p.Normal()
	names := [3]string{"sagittal, x", "coronal, y", "axial, z"}
	for a := 0; a < 3; a++ {
		if math.Abs(n[a]) > 0.985 {
			v := q[a]
			if math.Abs(v) < 0.05 {
				v = 0 // no "-0.0"
			}
			return fmt.Sprintf("%s = %.1f mm", names[a], v)
		}
	}
	return fmt.Sprintf("oblique through (%.1f, %.1f, %.1f) mm", q[0], q[1], q[2])
}

package review

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"

	"dosecover/dosemap"
)

// DefaultMarginMM is the default safety margin around the target, mm. 3 mm
// is one thermometry slice thickness and more than two in-plane voxels of
// typical thermometry (1.25–1.5 mm; common practice), so lethal dose in the
// partial-volume voxels along the target surface is not reported as
// outside, while a spill of one slice is.
const DefaultMarginMM = 3.0

// MaxMarginMM is the largest margin a Session prepared with a smaller margin
// can analyse without preparing again: the analysis grid extends this far
// beyond the target.
const MaxMarginMM = 20.0

// LargestMarginMM is the largest margin dosecover analyses.
const LargestMarginMM = 50.0

// MaxTrials is the largest number of Monte Carlo trials an analysis runs;
// the 5th-95th percentile band is stable long before (common practice: a
// few hundred trials), and more only costs time.
const MaxTrials = 10000

// maxAnalysisVoxels bounds the analysis grid (about 1.5 GB of working
// memory).
const maxAnalysisVoxels = 40_000_000

// ProbabilityCertain is the Monte Carlo mean probability of lethal dose at
// or below which a hole is called "certain".
const ProbabilityCertain = 0.05

// Settings are the choices of one analysis; settings.go holds their
// defaults, limits, JSON, hash and description.
type Settings struct {
	Threshold float64 `json:"threshold"`            // lethal dose in the model's unit (CEM43 minutes or Ω)
	MarginMM  float64 `json:"margin_mm"`            // safety margin around the target, mm
	Model     Model   `json:"model"`                // "cem43" or "arrhenius"
	Excluded  []int   `json:"excluded_sonications"` // sonication numbers left out of the cumulative dose
	Trials    int     `json:"trials"`               // Monte Carlo trials; 0 for none
	Seed      uint64  `json:"seed"`                 // Monte Carlo seed

	CEM43       dosemap.CEM43       `json:"cem43"`       // parameters of the cem43 model
	Arrhenius   dosemap.Arrhenius   `json:"arrhenius"`   // parameters of the arrhenius model
	Thermometry ThermometrySettings `json:"thermometry"` // PRF thermometry

	// NegligibleFraction is the fraction of Threshold below which a
	// sonication's possible dose at a voxel it did not measure is
	// negligible (the monitoring rule; README "Planes and the monitoring
	// rule"); DefaultNegligibleFraction by default.
	NegligibleFraction float64 `json:"negligible_fraction"`
	// CarryOver adds each sonication's estimated residual heat from the
	// earlier ones (dosemap.EstimateResidual) to its temperatures before
	// its dose is computed. Off by default: the dose is then what the
	// thermometry measured.
	CarryOver bool `json:"carry_over"`
	// ResidualWarnC is the estimated residual rise (°C, over the target
	// and margin) above which a sonication is named in a warning.
	ResidualWarnC float64 `json:"residual_warn_c"`
	// FocalLengthMM is the length of a sonication's heating along the
	// beam, mm: along a direction a sonication did not measure, the
	// monitoring rule bounds its heating by half of it around its hottest
	// point. 0 (the default): by the longest extent it did measure.
	FocalLengthMM float64 `json:"focal_length_mm"`
	// DriftFlagC is the removed drift, °C, above which a sonication is
	// flagged for review in the window, the report and the commands
	// (DefaultDriftFlagC by default).
	DriftFlagC float64 `json:"drift_flag_c"`
}

// DefaultResidualWarnC is the default ResidualWarnC: 1 °C, about the
// noise of one PRF thermometry voxel (common practice).
const DefaultResidualWarnC = 1.0

// DefaultSettings returns 240 CEM43 (Sapareto & Dewey 1984; the common
// lethal threshold, McDannold et al., Radiology 2006), DefaultMarginMM, no
// exclusions, 50 Monte Carlo trials with seed 1, the default CEM43 and
// Arrhenius parameters and thermometry options of package dosemap.
func DefaultSettings() Settings {
	return Settings{Threshold: 240, MarginMM: DefaultMarginMM, Model: ModelCEM43, Trials: 50, Seed: 1,
		CEM43: dosemap.DefaultCEM43(), Arrhenius: dosemap.DefaultArrhenius(), Thermometry: DefaultThermometrySettings(),
		NegligibleFraction: DefaultNegligibleFraction, ResidualWarnC: DefaultResidualWarnC,
		DriftFlagC: DefaultDriftFlagC}
}

// ProgressFunc receives the name of the stage being worked on and the
// fraction (0..1) of the whole job done.
type ProgressFunc func(stage string, frac float64)

func (p ProgressFunc) report(stage string, frac float64) {
	if p != nil {
		p(stage, frac)
	}
}

// sonData is one sonication prepared for analysis.
type sonData struct {
	number  int
	label   string
	dose    []float32 // on the thermometry grid; NaN unmeasured
	peak    float64   // largest dose
	temp    *tempStats
	quality *SonicationQuality
	series  any      // thermometry kept for Monte Carlo (engine type), whole or the Session's keep block
	notes   []string // frames that could not be read
	source  *dosemap.Sonication
	// noise holds, for a sonication measured off the session's grid
	// (several stacks, or one elsewhere), each stack's thermometry kept
	// for the Monte Carlo (see mcstacks.go); series is then nil.
	noise []*stackNoise
	reach reach // extent of the measured heating around the hottest point (monitoring rule)
	// peakTemp is the highest temperature of each voxel over the frames
	// (°C, NaN never valid) on the sonication's own grid; nil for a ready
	// dose map.
	peakTemp *dosemap.Volume

	// Residual heat (see residual.go).
	tail          *dosemap.CoolingTail // last frames, kept until the estimate is made
	residual      []float32            // estimated hidden rise at the baseline, thermometry grid of the session; NaN unknown, nil none
	cooling       float64              // s since the previous sonication's last frame; NaN unknown
	measured      []float32            // as-measured dose when dose holds the corrected one (CarryOver), else nil
	measuredReach reach                // the reach of measured
}

// tempStats are the temperature figures of one sonication.
type tempStats struct {
	peak, peak3, above43 float64
	peakPos              vec3
}

type avoidData struct {
	name string
	occ  []float32
}

// Session is a case prepared for repeated analysis: thermometry and dose of
// every sonication computed, structures rasterized, the distance from the
// target measured. Analyze with new settings reuses all of it. A Session is
// safe for concurrent use; analyses run one at a time.
type Session struct {
	mu        sync.Mutex
	label     string
	study     string // StudyInstanceUID of the case
	target    string
	model     Model
	unit      string
	prepared  Settings
	fg        *fineGrid
	occ       []float32 // target occupancy, analysis grid
	tmask     []bool    // occ >= 0.5
	dist      []float32 // mm to the nearest target voxel centre
	avoid     []avoidData
	sons      []*sonData
	warnings  []string
	maxMargin float64
	cache     *doseCache
	mcCache   *mcCache
	probe     seriesCache // temperature series for Probe and PeakTemperature
	// keep, when not nil, is the block of thermometry voxels the kept
	// series hold (a case whose frames stay in their files).
	keep *keepBox
	// exhaustiveMC simulates every voxel of the region instead of the
	// uncertain ones only (tests compare the two).
	exhaustiveMC bool
	// grown holds what AddSonication needs of the sonications prepared
	// (see grow.go).
	grown growState
}

// doseCache holds what depends only on the set of included sonications.
type doseCache struct {
	key      string
	included []int     // indexes into sons, delivery order
	cum      []float32 // cumulative measured dose (NaN where none measured), thermometry grid
	full     []bool    // every included sonication measured the voxel
	logFine  []float32 // analysis grid log-dose
	monFine  []bool    // analysis grid monitored (the monitoring rule)
	// The monitoring rule's masks for the negligible dose of monKey.
	monKey      string
	monInfo     *Monitoring
	strictFine  []bool    // analysis grid: every included sonication measured it
	measureFine []bool    // analysis grid: at least one included sonication measured it
	lc          []float32 // coarse log-dose, NaN where no included sonication measured
	cnt         []int16   // included sonications that measured each coarse voxel
	logBase     []float32 // analysis grid log-dose from the measured voxels only
	asMeasured  bool      // the doses without the residual heat correction (Session.asMeasured)
}

// Prepare computes the thermometry and dose of every sonication of c and
// rasterizes its structures, for analyses with settings like s (s.Model
// and the thermometry options fix the dose; the margin may later grow up
// to max(s.MarginMM, MaxMarginMM)). progress may be nil.
func Prepare(ctx context.Context, c *dosemap.Case, s Settings, progress ProgressFunc) (*Session, error) {
	if c == nil {
		return nil, errors.New("no case to analyse")
	}
	s = s.complete()
	if err := s.Validate(); err != nil {
		return nil, err
	}
	if len(c.Sonications) == 0 {
		return nil, fmt.Errorf("case %q has no sonication to analyse", c.Label)
	}
	tgt := c.Target()
	if tgt == nil {
		have := "no structures"
		if len(c.Structures) > 0 {
			names := make([]string, len(c.Structures))
			for n, st := range c.Structures {
				names[n] = fmt.Sprintf("%q (%s)", st.Name, st.Role)
			}
			have = "structures: " + strings.Join(names, ", ")
		}
		return nil, fmt.Errorf("case %q has no target structure (%s); load a contour file or choose the structure to use as the target", c.Label, have)
	}
	if !(s.MarginMM >= 0) || s.MarginMM > LargestMarginMM {
		return nil, fmt.Errorf("margin %g mm: want 0 to %g mm", s.MarginMM, LargestMarginMM)
	}
	ses := &Session{label: c.Label, study: c.StudyUID, target: tgt.Name, model: s.Model, prepared: s,
		maxMargin: math.Max(s.MarginMM, MaxMarginMM)}
	ref := c.Sonications[0].Geometry
	if err := ref.Validate(); err != nil {
		return nil, fmt.Errorf("sonication %d: thermometry grid: %w", c.Sonications[0].Number, err)
	}
	seen := map[int]bool{}
	for _, so := range c.Sonications {
		if so == nil {
			return nil, errors.New("the case lists a missing sonication")
		}
		if seen[so.Number] {
			return nil, fmt.Errorf("sonication number %d appears twice", so.Number)
		}
		seen[so.Number] = true
	}
	sol, err := newPlaneSolid(tgt, ref.Spacing[2])
	if err != nil {
		return nil, fmt.Errorf("target: %w", err)
	}
	// The target's bounding box enlarged by the largest margin and two
	// voxel diagonals: what the analysis grid must hold.
	var ext []vec3
	for _, p := range sol.corners() {
		for _, d := range [6]vec3{{1, 0, 0}, {-1, 0, 0}, {0, 1, 0}, {0, -1, 0}, {0, 0, 1}, {0, 0, -1}} {
			ext = append(ext, p.Add(d.Scale(ses.maxMargin+2*ref.Spacing.Norm())))
		}
	}
	common := false
	if ref, common = commonGrid(c.Sonications, ext); common {
		ses.warnings = append(ses.warnings, fmt.Sprintf("the sonications were measured on different planes: their dose is analysed on a common grid (%s); each sonication's dose is known only within half a slice of its own planes", ref))
	}
	// A case whose frames stay in the files keeps for the Monte Carlo only
	// the temperatures around the target (Temperature computes a whole
	// series again when asked).
	for _, so := range c.Sonications {
		if so.Source != nil {
			ses.keep = newKeepBox(ref, ext)
			break
		}
	}
	// The structures (which need only the thermometry grid) beside the
	// thermometry and dose of the sonications, in parallel, one worker per
	// CPU. A structure error stops the sonications.
	sctx, stopSons := context.WithCancel(ctx)
	defer stopSons()
	var structWarnings []string
	var structErr error
	structDone := make(chan struct{})
	go func() {
		defer close(structDone)
		structWarnings, structErr = ses.prepareStructures(ctx, c, tgt, sol, ext, ref)
		if structErr != nil {
			stopSons()
		}
	}()
	ns := len(c.Sonications)
	clocks, clockNote := sessionClock(c.Sonications)
	sons := make([]*sonData, ns)
	units := make([]string, ns)
	errs := make([]error, ns)
	var pmu sync.Mutex
	done := 0
	jobs := make(chan int)
	var wg sync.WaitGroup
	for w := 0; w < min(runtime.GOMAXPROCS(0), ns); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for n := range jobs {
				so := c.Sonications[n]
				if err := sctx.Err(); err != nil {
					errs[n] = err
					continue
				}
				sons[n], units[n], errs[n] = prepareStacks(sctx, so, s, ref, ses.keep, clocks[n], nil)
				pmu.Lock()
				done++
				progress.report(fmt.Sprintf("thermometry and dose, sonication %d", so.Number), 0.8*float64(done)/float64(ns))
				pmu.Unlock()
			}
		}()
	}
	for n := range c.Sonications {
		jobs <- n
	}
	close(jobs)
	wg.Wait()
	<-structDone
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	if structErr != nil {
		return nil, structErr
	}
	for n, so := range c.Sonications {
		if errs[n] != nil {
			name := fmt.Sprintf("sonication %d (%s)", so.Number, so.Label)
			if strings.HasPrefix(errs[n].Error(), name) {
				return nil, errs[n] // the thermometry and dose errors name it already
			}
			return nil, fmt.Errorf("%s: %w", name, errs[n])
		}
		for _, nt := range sons[n].notes {
			ses.warnings = append(ses.warnings, fmt.Sprintf("sonication %d: %s", so.Number, nt))
		}
		if n > 0 && units[n] != units[0] {
			return nil, fmt.Errorf("sonication %d: dose in %s, sonication %d in %s", so.Number, units[n], c.Sonications[0].Number, units[0])
		}
		if !common && !so.Geometry.SameGrid(ref, 0.01) {
			ses.warnings = append(ses.warnings, fmt.Sprintf("sonication %d was acquired on a different grid and was resampled onto the grid of sonication %d", so.Number, c.Sonications[0].Number))
		}
	}
	ses.sons, ses.unit = sons, units[0]
	if clockNote != "" {
		ses.warnings = append(ses.warnings, clockNote)
	}
	if err := ses.prepareResidual(ctx, c, s, ref, ext, progress); err != nil {
		return nil, err
	}
	ses.grown.sons, ses.grown.ext, ses.grown.clockNote = slices.Clone(c.Sonications), ext, clockNote
	ses.grown.common = common
	ses.warnings = append(ses.warnings, structWarnings...)
	progress.report("prepared", 1)
	return ses, nil
}

// prepareStructures rasterizes the target and avoid structures on the
// analysis grid around the thermometry grid ref and measures the distance
// from the target; it returns its warnings rather than adding them (it
// runs beside the sonications).
func (ses *Session) prepareStructures(ctx context.Context, c *dosemap.Case, tgt *dosemap.Structure, sol *planeSolid, ext []vec3, ref dosemap.Geometry) (warnings []string, err error) {
	// The target must overlap the thermometry somewhere: contours in
	// another frame of reference would otherwise stretch the analysis grid
	// across the patient.
	lo, hi := [3]float64{math.Inf(1), math.Inf(1), math.Inf(1)}, [3]float64{math.Inf(-1), math.Inf(-1), math.Inf(-1)}
	for _, p := range sol.corners() {
		i, j, k := ref.Voxel(p)
		for a, x := range [3]float64{i, j, k} {
			lo[a], hi[a] = math.Min(lo[a], x), math.Max(hi[a], x)
		}
	}
	dims := [3]int{ref.Cols, ref.Rows, ref.Slices}
	for a := 0; a < 3; a++ {
		if hi[a] < -0.5 || lo[a] > float64(dims[a])-0.5 {
			return nil, fmt.Errorf("target %q lies entirely outside the thermometry field of view (%s); check that contours and thermometry share a frame of reference", tgt.Name, ref)
		}
	}
	if tgt.FrameOfRef != "" && c.Sonications[0].FrameOfRef != "" && tgt.FrameOfRef != c.Sonications[0].FrameOfRef {
		warnings = append(warnings, fmt.Sprintf("target %q refers to frame of reference %s, the thermometry to %s; positions are compared as given", tgt.Name, tgt.FrameOfRef, c.Sonications[0].FrameOfRef))
	}
	if math.Abs(ref.Normal.Dot(ref.Row.Cross(ref.Col))) < 0.999 {
		warnings = append(warnings, "the thermometry slices are sheared (slice normal not perpendicular to the image plane); distances are computed as if the grid axes were orthogonal")
	}
	ses.fg = newFineGrid(ref, ext)
	g := ses.fg.fine
	if n := g.Len(); n > maxAnalysisVoxels {
		return nil, fmt.Errorf("the analysis grid would hold %d voxels (%s), more than the %d supported; the target is far larger than the thermometry", n, g, maxAnalysisVoxels)
	}
	if ses.occ, err = Occupancy(tgt, g, ref.Spacing[2]); err != nil {
		return nil, fmt.Errorf("target: %w", err)
	}
	ses.tmask = make([]bool, len(ses.occ))
	any := false
	for n, o := range ses.occ {
		ses.tmask[n] = o >= 0.5
		any = any || ses.tmask[n]
	}
	if !any {
		return nil, fmt.Errorf("target %q is smaller than one analysis voxel (%s)", tgt.Name, g)
	}
	for n := range c.Structures {
		st := &c.Structures[n]
		if st.Role != dosemap.RoleAvoid {
			continue
		}
		occ, err := Occupancy(st, g, ref.Spacing[2])
		if err != nil {
			return nil, fmt.Errorf("avoid structure: %w", err)
		}
		ses.avoid = append(ses.avoid, avoidData{st.Name, occ})
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	ses.dist = Distance(g, ses.tmask)
	return warnings, nil
}

func checkModel(m Model) error {
	switch m {
	case ModelCEM43, ModelArrhenius:
		return nil
	}
	return fmt.Errorf("model %q: want cem43 or arrhenius", string(m))
}

// Grid returns the analysis grid.
func (s *Session) Grid() dosemap.Geometry { return s.fg.fine }

// ThermometryGrid returns the grid of the thermometry and dose volumes.
func (s *Session) ThermometryGrid() dosemap.Geometry { return s.fg.coarse }

// SonicationDose returns the dose of sonication number n on the thermometry
// grid (NaN unmeasured), or nil when there is no such sonication.
func (s *Session) SonicationDose(n int) *dosemap.Volume {
	for _, sd := range s.sons {
		if sd.number == n {
			return &dosemap.Volume{Geometry: s.fg.coarse, Data: slices.Clone(sd.dose)}
		}
	}
	return nil
}

// Temperature returns the temperature series Prepare computed for
// sonication number n (absolute °C per frame, per-voxel noise and frame
// quality, on the thermometry grid, with the thermometry options the
// session was prepared with), or nil when there is no such sonication, it
// came as a ready dose map, or it was acquired on a grid other than
// ThermometryGrid (its series is then not kept). The series is shared with
// the session and must not be modified. For a case whose frames stay in
// their files (dicomio.LoadOptions.Deferred) the session keeps only the
// temperatures around the target, and Temperature computes the series
// again from the files (nil if that fails). A session prepared with
// CarryOver returns the temperatures with the estimated residual heat
// added (see Residual).
func (s *Session) Temperature(n int) *dosemap.TemperatureSeries {
	for _, sd := range s.sons {
		if sd.number == n {
			ts, _ := sd.series.(*dosemap.TemperatureSeries)
			if ts != nil && s.keep != nil {
				full, err := thermometry(sd.source, s.prepared.Thermometry)
				if err != nil {
					return nil
				}
				if s.prepared.CarryOver && sd.residual != nil {
					addOffset(full, sd.residual) // as the kept series
				}
				return full
			}
			return ts
		}
	}
	return nil
}

// Sonications returns the numbers of the prepared sonications in delivery
// order.
func (s *Session) Sonications() []int {
	out := make([]int, len(s.sons))
	for n, sd := range s.sons {
		out[n] = sd.number
	}
	return out
}

// Analyze prepares c and analyses it with s in one call.
func Analyze(ctx context.Context, c *dosemap.Case, s Settings, progress ProgressFunc) (*Result, error) {
	ses, err := Prepare(ctx, c, s, func(stage string, f float64) { progress.report(stage, 0.7*f) })
	if err != nil {
		return nil, err
	}
	return ses.Analyze(ctx, s, func(stage string, f float64) { progress.report(stage, 0.7+0.3*f) })
}

func (s *Session) checkSettings(set Settings) error {
	if err := set.Validate(); err != nil {
		return err
	}
	if set.MarginMM > s.maxMargin {
		return fmt.Errorf("margin %g mm exceeds the %g mm this session was prepared for; prepare it again with the larger margin", set.MarginMM, s.maxMargin)
	}
	if set.Model != s.model {
		return fmt.Errorf("dose model %q differs from the %q this session was prepared with; prepare it again", set.Model, s.model)
	}
	if set.NeedsThermometry(s.prepared) {
		return errors.New("dose model parameters or thermometry options differ from those this session was prepared with; prepare it again")
	}
	if set.CarryOver != s.prepared.CarryOver {
		return errors.New("carry_over differs from the setting this session was prepared with; prepare it again")
	}
	left := len(s.sons)
	for _, e := range set.Excluded {
		found := false
		for _, sd := range s.sons {
			if sd.number == e {
				found = true
			}
		}
		if !found {
			nums := make([]string, 0, len(s.sons))
			for _, n := range s.Sonications() {
				nums = append(nums, strconv.Itoa(n))
			}
			return fmt.Errorf("excluded sonication %d does not exist (the case has sonications %s)", e, strings.Join(nums, ", "))
		}
		left--
	}
	if left <= 0 {
		return errors.New("every sonication is excluded")
	}
	return nil
}

// doses returns the dose cache for the included sonications of set.
func (s *Session) doses(ctx context.Context, set Settings) (*doseCache, error) {
	return s.doseSum(ctx, set, false)
}

// doseSum returns the dose cache for the included sonications of set: of
// the as-measured dose when measured is true (not cached), else of the
// dose the session was prepared for.
func (s *Session) doseSum(ctx context.Context, set Settings, measured bool) (*doseCache, error) {
	ex := map[int]bool{}
	for _, e := range set.Excluded {
		ex[e] = true
	}
	var inc []int
	var key strings.Builder
	for n, sd := range s.sons {
		if !ex[sd.number] {
			inc = append(inc, n)
			key.WriteString(strconv.Itoa(n) + ",")
		}
	}
	if !measured && s.cache != nil && s.cache.key == key.String() {
		s.monitor(set, s.cache)
		return s.cache, nil
	}
	cl := s.fg.coarse.Len()
	dc := &doseCache{key: key.String(), included: inc, cum: make([]float32, cl), full: make([]bool, cl), asMeasured: measured}
	run := make([]float32, cl)
	cnt := make([]int16, cl)
	for _, n := range inc {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		d := s.sons[n].dose
		if measured && s.sons[n].measured != nil {
			d = s.sons[n].measured
		}
		for v, x := range d {
			if x == x {
				run[v] += x
				cnt[v]++
			}
		}
	}
	lc := make([]float32, cl)
	for v := range run {
		if cnt[v] == 0 {
			dc.cum[v] = float32(math.NaN())
			lc[v] = float32(math.NaN())
			continue
		}
		dc.cum[v] = run[v]
		lc[v] = logDose(run[v])
		dc.full[v] = int(cnt[v]) == len(inc)
	}
	dc.lc, dc.cnt = lc, cnt
	fl := s.fg.fine.Len()
	// The log-dose where measured, and the strict and measured-planes
	// masks, depend on the included sonications only; the monitoring
	// rule's mask (monitor) on the negligible dose too.
	dc.logBase = make([]float32, fl)
	dc.strictFine = make([]bool, fl)
	s.fg.interpLog(lc, dc.full, dc.logBase, dc.strictFine)
	// Where every voxel is measured by all included sonications or by
	// none (one shared grid), the measured planes are the strict region.
	measuredAny := make([]bool, cl)
	allOrNone := true
	for v, n := range cnt {
		measuredAny[v] = n > 0
		allOrNone = allOrNone && (n == 0 || int(n) == len(inc))
	}
	if allOrNone {
		dc.measureFine = slices.Clone(dc.strictFine)
	} else {
		dc.measureFine = make([]bool, fl)
		s.fg.interpMask(lc, measuredAny, dc.measureFine)
	}
	s.monitor(set, dc)
	if !measured {
		s.cache = dc
	}
	return dc, nil
}

// Analyze measures coverage, holes, spill and per-sonication figures with
// settings set, reusing the prepared dose. A change of threshold, margin or
// excluded sonications needs no new Prepare; a change of model does.
// progress may be nil.
func (s *Session) Analyze(ctx context.Context, set Settings, progress ProgressFunc) (*Result, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	set = set.complete()
	if err := s.checkSettings(set); err != nil {
		return nil, err
	}
	set.Excluded = slices.Clone(set.Excluded)
	sort.Ints(set.Excluded)
	progress.report("cumulative dose", 0)
	dc, err := s.doses(ctx, set)
	if err != nil {
		return nil, err
	}
	// The Monte Carlo trials need only the dose cache: they run beside the
	// rest of the analysis, which waits for them before it returns.
	var mcDone chan struct{}
	var mcOut *mcOutcome
	var mcErr error
	if set.Trials > 0 {
		mcDone = make(chan struct{})
		go func() {
			defer close(mcDone)
			mcOut, mcErr = s.uncertainty(ctx, set, dc)
		}()
		defer func() { <-mcDone }() // also on early returns, before s.mu is released
	}
	g := s.fg.fine
	vv := g.VoxelVolume()
	lt := float32(math.Log(set.Threshold))
	r := &Result{
		SchemaVersion: SchemaVersion, SoftwareVersion: dosemap.Version,
		Case: s.label, StudyUID: s.study, Target: s.target, Model: string(set.Model), DoseUnit: s.unit,
		Threshold: set.Threshold, MarginMM: set.MarginMM, Settings: set,
		Grid: GridInfo{Size: [3]int{g.Cols, g.Rows, g.Slices}, SpacingMM: [3]float64(g.Spacing),
			RefineSlices: s.fg.rz, SubSamples: SubSamples, Connectivity: int(RegionConnectivity), Geometry: g},
		Warnings: slices.Clone(s.warnings), Cautions: slices.Clone(Cautions),
		Holes: []Hole{}, OutsideClusters: []Cluster{}, Avoid: []AvoidDose{},
	}
	if set.Model == ModelCEM43 {
		r.ThresholdCEM43 = opt(set.Threshold)
	}
	r.Thermometry = set.Thermometry.info()
	n := g.Len()
	lethal := make([]bool, n) // measured dose at or above threshold (also where partly measured)
	lethalVol := &dosemap.Volume{Geometry: g, Data: make([]float32, n)}
	nan := float32(math.NaN())
	for v, l := range dc.logFine {
		switch {
		case l != l:
			lethalVol.Data[v] = nan
		case l >= lt:
			lethal[v] = true
			lethalVol.Data[v] = 1
		}
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	progress.report("coverage", 0.2)
	// Coverage.
	var tv, mv, cv float64
	type dw struct{ d, w float32 }
	var tdose []dw
	for v, o := range s.occ {
		if o == 0 {
			continue
		}
		tv += float64(o)
		if dc.monFine[v] {
			mv += float64(o)
			tdose = append(tdose, dw{dc.logFine[v], o})
			if lethal[v] {
				cv += float64(o)
			}
		}
	}
	cov := &r.Coverage
	cov.TargetVolumeML = tv * vv / 1000
	cov.MonitoredVolumeML = mv * vv / 1000
	cov.NotMonitoredML = (tv - mv) * vv / 1000
	cov.CoveredVolumeML = cv * vv / 1000
	if tv > 0 {
		cov.MonitoredFraction = mv / tv
		cov.NotMonitoredFraction = 1 - mv/tv
		cov.CoveredFractionOfTarget = cv / tv
	}
	if mv > 0 {
		cov.CoveredFraction = opt(cv / mv)
	}
	if cov.NotMonitoredFraction > 0.005 {
		r.Warnings = append(r.Warnings, fmt.Sprintf("%.1f %% of the target (%.2f mL) was not monitored by the thermometry and is counted as not covered in the coverage of the whole target", 100*cov.NotMonitoredFraction, cov.NotMonitoredML))
	}
	sort.Slice(tdose, func(a, b int) bool { return tdose[a].d > tdose[b].d })
	tcum := make([]float64, len(tdose)) // volume with dose >= tdose[a].d
	acc := 0.0
	for a, x := range tdose {
		acc += float64(x.w)
		tcum[a] = acc
	}
	dx := func(p float64) *float64 {
		if mv == 0 {
			return nil
		}
		want := p * mv
		a := sort.Search(len(tcum), func(a int) bool { return tcum[a] >= want-1e-9*mv })
		if a >= len(tdose) {
			a = len(tdose) - 1
		}
		return opt(math.Exp(float64(tdose[a].d)))
	}
	cov.D98, cov.D50, cov.D2 = dx(0.98), dx(0.50), dx(0.02)
	fracAbove := func(ds []dw, cum []float64, total float64, d float64) float64 {
		if total == 0 {
			return 0
		}
		ld := float32(math.Log(d))
		a := sort.Search(len(ds), func(a int) bool { return ds[a].d < ld })
		if a == 0 {
			return 0
		}
		return cum[a-1] / total
	}
	// Margin.
	mm := float32(set.MarginMM)
	margin := &dosemap.Volume{Geometry: g, Data: make([]float32, n)}
	var sdose []dw
	var smv float64
	outside := make([]bool, n)
	for v, d := range s.dist {
		if d <= mm {
			margin.Data[v] = 1
			if w := 1 - s.occ[v]; w > 0 && dc.monFine[v] {
				sdose = append(sdose, dw{dc.logFine[v], w})
				smv += float64(w)
			}
		} else if lethal[v] {
			outside[v] = true
		}
	}
	sort.Slice(sdose, func(a, b int) bool { return sdose[a].d > sdose[b].d })
	scum := make([]float64, len(sdose))
	acc = 0
	for a, x := range sdose {
		acc += float64(x.w)
		scum[a] = acc
	}
	for e := 0; e <= 90; e++ {
		d := math.Pow(10, -3+float64(e)/10)
		r.DVH.Dose = append(r.DVH.Dose, d)
		r.DVH.Target = append(r.DVH.Target, fracAbove(tdose, tcum, mv, d))
		r.DVH.MarginShell = append(r.DVH.MarginShell, fracAbove(sdose, scum, smv, d))
	}
	if mv == 0 { // a curve of nothing is not measurable, not 0
		r.DVH.Target = nil
	}
	if smv == 0 {
		r.DVH.MarginShell = nil
	}
	lo, hi := set.Threshold*18/240, set.Threshold*1000/240
	r.CoverageVsThreshold = []ThresholdPoint{}
	for e := 0; e < 40; e++ {
		d := lo * math.Pow(hi/lo, float64(e)/39)
		p := ThresholdPoint{Threshold: d}
		if mv > 0 { // null when nothing is monitored
			p.CoveredFraction = opt(fracAbove(tdose, tcum, mv, d))
		}
		r.CoverageVsThreshold = append(r.CoverageVsThreshold, p)
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	progress.report("holes", 0.4)
	holeMask := make([]bool, n)
	for v := range holeMask {
		holeMask[v] = s.occ[v] > 0 && dc.monFine[v] && !lethal[v]
	}
	r.Monitoring = s.monitoringFigures(dc, lethal)
	if w := unseenHeatingWarning(r.Monitoring, set); w != "" {
		r.Warnings = append(r.Warnings, w)
	}
	hl, nh := Components(g, holeMask, RegionConnectivity)
	r.Holes = s.holes(hl, nh, dc, tv)
	// Lethal outside the margin.
	progress.report("outside the margin", 0.55)
	var lethalCount, outCount int
	for v := range lethal {
		if lethal[v] {
			lethalCount++
		}
		if outside[v] {
			outCount++
		}
	}
	r.LethalVolumeML = float64(lethalCount) * vv / 1000
	r.OutsideMarginLethalML = float64(outCount) * vv / 1000
	cl, nc := Components(g, outside, RegionConnectivity)
	r.OutsideClusters = s.clusters(cl, nc, dc)
	// Relabel so label n is the n-th region of the sorted lists.
	r.HoleLabels = relabel(g, hl, r.Holes, func(h Hole) int { return h.label() })
	r.SpillLabels = relabel(g, cl, r.OutsideClusters, func(c Cluster) int { return c.label() })
	// Avoid structures.
	for _, av := range s.avoid {
		ad := AvoidDose{Name: av.name}
		var vol, mon, leth float64
		peak := math.Inf(-1)
		pv := -1
		for v, o := range av.occ {
			if o == 0 {
				continue
			}
			vol += float64(o)
			if dc.monFine[v] {
				mon += float64(o)
			}
			if lethal[v] {
				leth += float64(o)
			}
			if l := dc.logFine[v]; o >= 0.5 && l == l && float64(l) > peak {
				peak, pv = float64(l), v
			}
		}
		ad.VolumeML = vol * vv / 1000
		if vol > 0 {
			ad.MonitoredFraction = opt(mon / vol)
		}
		ad.LethalVolumeMM3 = leth * vv
		if pv >= 0 {
			ad.PeakDose = opt(math.Exp(peak))
			p := [3]float64(g.Point(ijk(g, pv)))
			ad.PeakMM = &p
		}
		r.Avoid = append(r.Avoid, ad)
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	progress.report("sonications", 0.7)
	s.perSonication(r, set, dc, lethal, outside, lt, mv)
	s.residualFigures(r, set)
	if set.CarryOver {
		am, err := s.asMeasured(ctx, set)
		if err != nil {
			return nil, err
		}
		r.AsMeasured = am
	}
	for _, sd := range s.sons {
		if sd.quality != nil {
			r.Quality = append(r.Quality, *sd.quality)
		}
	}
	if r.Quality == nil {
		r.Quality = []SonicationQuality{}
	}
	r.Dose = &dosemap.Volume{Geometry: s.fg.coarse, Data: slices.Clone(dc.cum)}
	r.TargetMask = &dosemap.Volume{Geometry: g, Data: slices.Clone(s.occ)}
	r.MarginMask = margin
	r.Lethal = lethalVol
	if mcDone != nil {
		progress.report("Monte Carlo", 0.8)
		<-mcDone
		if mcErr != nil {
			return nil, mcErr
		}
		mcOut.apply(r, s.occ)
	}
	progress.report("done", 1)
	return r, nil
}

func ijk(g dosemap.Geometry, n int) (float64, float64, float64) {
	i, j, k := g.IJK(n)
	return float64(i), float64(j), float64(k)
}

// sliceSet turns a set of 0-based thermometry slices into a sorted 1-based
// list.
func sliceSet(m map[int]bool) []int {
	out := []int{}
	for k := range m {
		out = append(out, k+1)
	}
	sort.Ints(out)
	return out
}

func (s *Session) centroidSlice(p vec3) int {
	_, _, k := s.fg.coarse.Voxel(p)
	kk := int(math.Round(k))
	if kk < 0 || kk >= s.fg.coarse.Slices {
		return 0
	}
	return kk + 1
}

// holes measures the labelled holes, largest first.
func (s *Session) holes(hl []int32, nh int, dc *doseCache, tv float64) []Hole {
	g := s.fg.fine
	vv := g.VoxelVolume()
	type acc struct {
		w, ci, cj, ck float64
		lo, hi        [3]int
		slices        map[int]bool
		surf, unmon   bool
		maxd          float32
	}
	as := make([]acc, nh+1)
	for a := range as {
		as[a].lo = [3]int{math.MaxInt, math.MaxInt, math.MaxInt}
		as[a].hi = [3]int{-1, -1, -1}
		as[a].slices = map[int]bool{}
		as[a].maxd = float32(math.Inf(-1))
	}
	for v, l := range hl {
		if l == 0 {
			continue
		}
		a := &as[l]
		i, j, k := g.IJK(v)
		o := float64(s.occ[v])
		a.w += o
		a.ci += o * float64(i)
		a.cj += o * float64(j)
		a.ck += o * float64(k)
		for x, c := range [3]int{i, j, k} {
			a.lo[x] = min(a.lo[x], c)
			a.hi[x] = max(a.hi[x], c)
		}
		if cs := s.fg.coarseSlice(k); cs >= 0 {
			a.slices[cs] = true
		}
		if d := dc.logFine[v]; d > a.maxd {
			a.maxd = d
		}
		if o < 1 {
			a.surf = true // the target surface passes through this voxel
		}
		for _, off := range neighbourOffsets(Connect6) {
			ii, jj, kk := i+off[0], j+off[1], k+off[2]
			if !g.Contains(ii, jj, kk) {
				a.surf = true
				continue
			}
			m := g.Index(ii, jj, kk)
			if s.occ[m] == 0 {
				a.surf = true
			} else if !dc.monFine[m] {
				a.unmon = true
			}
		}
	}
	out := make([]Hole, 0, nh)
	for l := 1; l <= nh; l++ {
		a := &as[l]
		if a.w == 0 {
			continue
		}
		c := g.Point(a.ci/a.w, a.cj/a.w, a.ck/a.w)
		h := Hole{
			VolumeMM3: a.w * vv, FractionTarget: a.w / tv,
			CentroidMM: [3]float64(c), CentroidSlice: s.centroidSlice(c),
			DepthMM: regionDepth(g, hl, int32(l), a.lo, a.hi), TouchesSurface: a.surf, TouchesUnmonitored: a.unmon,
			Slices: sliceSet(a.slices), MaxDose: finite(math.Exp(float64(a.maxd))), id: l,
		}
		out = append(out, h)
	}
	sort.SliceStable(out, func(a, b int) bool { return out[a].VolumeMM3 > out[b].VolumeMM3 })
	return out
}

// regionDepth returns the largest distance (mm) from a voxel centre of
// region l to the nearest voxel centre outside it, by the distance
// transform of the region's bounding box padded by one voxel.
func regionDepth(g dosemap.Geometry, lab []int32, l int32, lo, hi [3]int) float64 {
	nx, ny, nz := hi[0]-lo[0]+3, hi[1]-lo[1]+3, hi[2]-lo[2]+3
	lg := dosemap.NewAxialGeometry(nx, ny, nz, g.Spacing, vec3{})
	feat := make([]bool, lg.Len())
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				a, b, c := lo[0]+i-1, lo[1]+j-1, lo[2]+k-1
				feat[lg.Index(i, j, k)] = !g.Contains(a, b, c) || lab[g.Index(a, b, c)] != l
			}
		}
	}
	d := SquaredDistance(lg, feat)
	best := 0.0
	for n, x := range d {
		if !feat[n] && x > best {
			best = x
		}
	}
	return math.Sqrt(best)
}

// clusters measures the labelled lethal regions outside the margin,
// largest first.
func (s *Session) clusters(cl []int32, nc int, dc *doseCache) []Cluster {
	g := s.fg.fine
	vv := g.VoxelVolume()
	type acc struct {
		w, ci, cj, ck float64
		slices        map[int]bool
		maxd, peak    float32
		son           []float64
	}
	as := make([]acc, nc+1)
	for a := range as {
		as[a].slices = map[int]bool{}
		as[a].son = make([]float64, len(dc.included))
		as[a].peak = float32(math.Inf(-1))
	}
	for v, l := range cl {
		if l == 0 {
			continue
		}
		a := &as[l]
		i, j, k := g.IJK(v)
		a.w++
		a.ci += float64(i)
		a.cj += float64(j)
		a.ck += float64(k)
		if cs := s.fg.coarseSlice(k); cs >= 0 {
			a.slices[cs] = true
		}
		a.maxd = max(a.maxd, s.dist[v])
		a.peak = max(a.peak, dc.logFine[v])
		for m, sn := range dc.included {
			a.son[m] += float64(s.fg.linearAt(s.sons[sn].dose, v))
		}
	}
	out := make([]Cluster, 0, nc)
	for l := 1; l <= nc; l++ {
		a := &as[l]
		if a.w == 0 {
			continue
		}
		c := g.Point(a.ci/a.w, a.cj/a.w, a.ck/a.w)
		best, tot := 0, 0.0
		for m, x := range a.son {
			tot += x
			if x > a.son[best] {
				best = m
			}
		}
		cu := Cluster{VolumeMM3: a.w * vv, CentroidMM: [3]float64(c), CentroidSlice: s.centroidSlice(c),
			Slices: sliceSet(a.slices), MaxDistanceMM: float64(a.maxd), PeakDose: finite(math.Exp(float64(a.peak))),
			Sonication: s.sons[dc.included[best]].number, id: l}
		if tot > 0 {
			cu.SonicationShare = a.son[best] / tot
		}
		out = append(out, cu)
	}
	sort.SliceStable(out, func(a, b int) bool { return out[a].VolumeMM3 > out[b].VolumeMM3 })
	return out
}

func relabel[T any](g dosemap.Geometry, lab []int32, list []T, id func(T) int) *dosemap.Volume {
	m := make(map[int32]float32, len(list))
	for n, x := range list {
		m[int32(id(x))] = float32(n + 1)
	}
	out := &dosemap.Volume{Geometry: g, Data: make([]float32, len(lab))}
	for v, l := range lab {
		if l != 0 {
			out.Data[v] = m[l]
		}
	}
	return out
}

// perSonication fills r.Sonications.
func (s *Session) perSonication(r *Result, set Settings, dc *doseCache, lethal, outside []bool, lt float32, mv float64) {
	g := s.fg.fine
	vv := g.VoxelVolume()
	ni := len(dc.included)
	added := make([]float64, ni)
	leth := make([]float64, ni)
	out := make([]float64, ni)
	// first[p]: the first included sonication after which the cumulative
	// dose of lethal voxel pending[p], interpolated as logAtLinear does,
	// reaches the threshold (the last sonication when none does: the
	// lethal mask may come from another interpolation). run is the
	// cumulative dose after sonication a (unmeasured counted 0), summed
	// in delivery order as dc.cum is.
	var pending []int32
	for v, l := range lethal {
		if l {
			pending = append(pending, int32(v))
		}
	}
	first := make([]int, len(pending))
	left := make([]int32, len(pending)) // positions in pending not yet reached
	for p := range left {
		left[p] = int32(p)
		first[p] = ni - 1
	}
	// Only the coarse voxels the lethal voxels' taps read are summed.
	run := make([]float32, s.fg.coarse.Len())
	mark := make([]bool, len(run))
	for _, v := range pending {
		s.fg.markLinearTaps(int(v), mark)
	}
	var taps []int32
	for v, m := range mark {
		if m {
			taps = append(taps, int32(v))
		}
	}
	for a := 0; a < ni && len(left) > 0; a++ {
		d, _ := dc.doseOf(s.sons[dc.included[a]])
		for _, v := range taps {
			if x := d[v]; x == x {
				run[v] += x
			}
		}
		still := left[:0]
		for _, p := range left {
			if s.fg.logAtLinear(run, int(pending[p])) >= lt {
				first[p] = a
			} else {
				still = append(still, p)
			}
		}
		left = still
	}
	for p, v32 := range pending {
		v, m := int(v32), first[p]
		leth[m] += vv
		if outside[v] {
			out[m] += vv
		}
		if o := s.occ[v]; o > 0 && dc.monFine[v] && mv > 0 {
			added[m] += float64(o) / mv
		}
	}
	pos := map[int]int{}
	for m, n := range dc.included {
		pos[n] = m
	}
	cum := 0.0
	for n, sd := range s.sons {
		st := SonicationStats{Number: sd.number, Label: sd.label, PeakDose: finite(sd.peak)}
		if m, ok := pos[n]; ok {
			cum += added[m]
			st.LethalAddedML = leth[m] / 1000
			if mv > 0 {
				st.AddedCoverage = opt(added[m])
			}
			st.OutsideAddedML = out[m] / 1000
		} else {
			st.Excluded = true
			if mv > 0 {
				st.AddedCoverage = opt(0)
			}
		}
		if mv > 0 { // null when no part of the target is monitored
			st.CumulativeCoverage = opt(cum)
		}
		if t := sd.temp; t != nil {
			st.PeakTempC, st.Peak3x3C, st.TimeAbove43S = opt(t.peak), opt(t.peak3), opt(t.above43)
			if st.PeakTempC != nil {
				p := [3]float64(t.peakPos)
				st.PeakMM = &p
			}
		}
		r.Sonications = append(r.Sonications, st)
	}
}

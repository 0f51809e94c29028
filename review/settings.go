package review

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"dosecover/dosemap"
)

// The settings of an analysis (type Settings, declared beside Prepare)
// have one home here: their defaults (DefaultSettings), limits and
// validation (Validate), their JSON (the "settings" object of a Result,
// read back by ReadSettings), their hash (Hash), a description for people
// (Describe) and what a change of them costs (Redo). The window, the
// review records, the commands, the audit and the report all use them.
//
// To add a setting: add the field with its snake_case JSON name to
// Settings (or ThermometrySettings), its default to DefaultSettings, its
// limits to Validate, and to Redo when it needs new thermometry; the JSON,
// the hash and --settings FILE follow by themselves.

// Model names a dose model.
type Model string

// The dose models.
const (
	// ModelCEM43 is the cumulative equivalent minutes at 43 °C of Sapareto
	// and Dewey (1984), parameters in Settings.CEM43.
	ModelCEM43 Model = "cem43"
	// ModelArrhenius is the damage integral of Henriques and Moritz (1947),
	// parameters in Settings.Arrhenius.
	ModelArrhenius Model = "arrhenius"
)

// ParseModel returns the model named name ("cem43" or "arrhenius", any
// case).
func ParseModel(name string) (Model, error) {
	m := Model(strings.ToLower(strings.TrimSpace(name)))
	if err := checkModel(m); err != nil {
		return "", err
	}
	return m, nil
}

// DefaultThreshold returns the lethal dose commonly used with m: 240 CEM43
// minutes (Sapareto & Dewey 1984; McDannold et al., Radiology 2006) or
// Ω = 1 (Henriques & Moritz 1947).
func (m Model) DefaultThreshold() float64 {
	if m == ModelArrhenius {
		return dosemap.Arrhenius{}.DefaultThreshold()
	}
	return dosemap.CEM43{}.DefaultThreshold()
}

// ThermometrySettings are the choices of the PRF thermometry (package
// dosemap's ThermometryOptions, in the units people enter). Zero B0, TE
// and phase scale mean "from each file".
type ThermometrySettings struct {
	AlphaPPMPerC   float64             `json:"alpha_ppm_per_c"` // PRF thermal coefficient α, ppm/°C (negative)
	PhaseSign      float64             `json:"phase_sign"`      // +1 or −1: the scanner's phase sign convention
	B0T            float64             `json:"b0_t"`            // main field, T; 0: each series' own
	TEms           float64             `json:"te_ms"`           // echo time, ms; 0: each series' own
	PhaseScale     float64             `json:"phase_scale_rad"` // phase per stored unit, rad; 0: from the files' tags
	BaselineFrames int                 `json:"baseline_frames"` // frames before heating averaged as the phase reference
	BodyTempC      float64             `json:"body_temp_c"`     // temperature of the tissue in the baseline frames, °C
	Drift          dosemap.DriftMethod `json:"drift"`           // "none", "mean" or "polynomial"
	DriftOrder     int                 `json:"drift_order"`     // order of the polynomial drift fit, 0–2
	DriftReference *Rect               `json:"drift_reference"` // unheated region the drift is measured in; null: chosen automatically
	MinMagnitude   float64             `json:"min_magnitude"`   // fraction of the 98th-percentile baseline magnitude below which a voxel is invalid; 0: no check
	MaxMotion      float64             `json:"max_motion"`      // a frame whose magnitude correlates with the baseline by less than 1 − this is rejected; 0: no check
}

// DefaultThermometrySettings returns the defaults of package dosemap
// (DefaultThermometryOptions): α −0.01 ppm/°C, B0, TE and phase scale from
// the files, 2 baseline frames, 37 °C, first-order polynomial drift in an
// automatic reference region, magnitude threshold 0.1, motion threshold
// 0.1.
func DefaultThermometrySettings() ThermometrySettings {
	d := dosemap.DefaultThermometryOptions()
	return ThermometrySettings{AlphaPPMPerC: d.PRF.Alpha, PhaseSign: 1, BaselineFrames: d.BaselineFrames,
		BodyTempC: d.BodyTemp, Drift: d.Drift, DriftOrder: d.DriftOrder,
		MinMagnitude: d.MinMagnitude, MaxMotion: d.MaxMotion}
}

// Options returns the options of dosemap.Thermometry for a series on grid
// g; the drift reference, when drawn, becomes the voxels of g whose
// centres project into it. It fails when the drawn reference holds no
// voxel of g.
func (t ThermometrySettings) Options(g dosemap.Geometry) (dosemap.ThermometryOptions, error) {
	o := dosemap.ThermometryOptions{
		PRF:            dosemap.PRF{Alpha: t.AlphaPPMPerC, B0: t.B0T, TE: t.TEms / 1000, Sign: t.PhaseSign},
		BaselineFrames: t.BaselineFrames, BodyTemp: t.BodyTempC,
		Drift: t.Drift, DriftOrder: t.DriftOrder,
		MinMagnitude: t.MinMagnitude, MaxMotion: t.MaxMotion,
	}
	// dosemap reads zero as "the default" and a negative value as "off".
	if o.MinMagnitude == 0 {
		o.MinMagnitude = -1
	}
	if o.MaxMotion == 0 {
		o.MaxMotion = -1
	}
	if t.DriftReference != nil && t.Drift != dosemap.DriftNone {
		m, n := t.DriftReference.Mask(g)
		if n == 0 {
			return o, fmt.Errorf("the drawn drift reference (%.0f × %.0f mm) holds no thermometry voxel; draw it inside the thermometry field of view or use the automatic reference",
				t.DriftReference.W, t.DriftReference.H)
		}
		o.Reference = m
	}
	return o, nil
}

// Rect is a rectangle in patient space (mm, DICOM LPS): corner Origin,
// unit edge directions U and V, extents W along U and H along V.
type Rect struct {
	Origin dosemap.Vec3 `json:"origin_mm"`
	U      dosemap.Vec3 `json:"u"`
	V      dosemap.Vec3 `json:"v"`
	W      float64      `json:"width_mm"`
	H      float64      `json:"height_mm"`
}

// NewRect returns the rectangle spanned by corners a and b in the plane
// with unit in-plane directions u and v.
func NewRect(a, b, u, v dosemap.Vec3) *Rect {
	d := b.Sub(a)
	du, dv := d.Dot(u), d.Dot(v)
	o := a
	if du < 0 {
		o, du = o.Add(u.Scale(du)), -du
	}
	if dv < 0 {
		o, dv = o.Add(v.Scale(dv)), -dv
	}
	return &Rect{Origin: o, U: u, V: v, W: du, H: dv}
}

// Corners returns the four corners in drawing order.
func (r *Rect) Corners() [4]dosemap.Vec3 {
	return [4]dosemap.Vec3{r.Origin, r.Origin.Add(r.U.Scale(r.W)), r.Origin.Add(r.U.Scale(r.W)).Add(r.V.Scale(r.H)), r.Origin.Add(r.V.Scale(r.H))}
}

// Mask returns the voxels of g whose centres project into r (a prism
// through every slice) and their number.
func (r *Rect) Mask(g dosemap.Geometry) ([]bool, int) {
	m := make([]bool, g.Len())
	n := 0
	for i := range m {
		a, b, k := g.IJK(i)
		d := g.Point(float64(a), float64(b), float64(k)).Sub(r.Origin)
		if x, y := d.Dot(r.U), d.Dot(r.V); x >= 0 && x <= r.W && y >= 0 && y <= r.H {
			m[i] = true
			n++
		}
	}
	return m, n
}

// Limits of the settings (Validate).
const (
	MinBreakC, MaxBreakC       = 30.0, 50.0 // CEM43 break temperature, °C
	MinAlphaPPMPerC            = -0.1       // PRF α: water is −0.0104 (Ishihara et al., MRM 1995)
	MinBodyTempC, MaxBodyTempC = 20.0, 45.0 // baseline tissue temperature, °C
	MaxB0T                     = 12.0       // main field, T: above any clinical magnet
	MaxTEms                    = 1000.0     // echo time, ms
	MaxBaselineFrames          = 1000       // baseline frames
	MaxDriftOrder              = 2          // dosemap.Thermometry fits orders 0–2
	MaxSonicationNumber        = 1_000_000  // sonication numbers in Excluded
	maxSettingsFile            = 1 << 20    // bytes of a settings file
	MaxResidualWarnC           = 100.0      // residual heat warning level, °C
	MaxFocalLengthMM           = 100.0      // heating along the beam, mm: well beyond any focal spot
	MaxDriftFlagC              = 20.0       // drift flag, °C: beyond any usable thermometry
)

// Validate reports the first setting that cannot be used, naming it by its
// JSON key.
func (s Settings) Validate() error {
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	switch {
	case !(s.Threshold > 0) || !finite(s.Threshold):
		return fmt.Errorf("threshold %g: want a positive dose in the model's unit", s.Threshold)
	case !(s.MarginMM >= 0) || s.MarginMM > LargestMarginMM:
		return fmt.Errorf("margin_mm %g: want 0 to %g mm", s.MarginMM, LargestMarginMM)
	case s.Trials < 0 || s.Trials > MaxTrials:
		return fmt.Errorf("trials %d: want 0 to %d (0: no uncertainty band)", s.Trials, MaxTrials)
	case !(s.NegligibleFraction >= 0 && s.NegligibleFraction < 1):
		return fmt.Errorf("negligible_fraction %g: want 0 to below 1 (a fraction of the threshold; the monitoring rule)", s.NegligibleFraction)
	}
	if err := checkModel(s.Model); err != nil {
		return err
	}
	seen := map[int]bool{}
	for _, n := range s.Excluded {
		if n < 1 || n > MaxSonicationNumber {
			return fmt.Errorf("excluded_sonications: %d is not a sonication number", n)
		}
		if seen[n] {
			return fmt.Errorf("excluded_sonications: %d is listed twice", n)
		}
		seen[n] = true
	}
	c := s.CEM43
	switch {
	case !(c.Break >= MinBreakC && c.Break <= MaxBreakC):
		return fmt.Errorf("cem43.break_c %g °C: want %g to %g °C", c.Break, MinBreakC, MaxBreakC)
	case !(c.RAbove > 0 && c.RAbove <= 1):
		return fmt.Errorf("cem43.r_above %g: want above 0 and at most 1", c.RAbove)
	case !(c.RBelow > 0 && c.RBelow <= 1):
		return fmt.Errorf("cem43.r_below %g: want above 0 and at most 1", c.RBelow)
	case c.Rule != dosemap.RuleTrapezoid && c.Rule != dosemap.RuleRectangle:
		return fmt.Errorf("cem43.rule %d: want trapezoid or rectangle", int(c.Rule))
	}
	a := s.Arrhenius
	switch {
	case !(a.A > 0) || !finite(a.A):
		return fmt.Errorf("arrhenius.a_per_s %g: want a positive frequency factor", a.A)
	case !(a.Ea > 0) || !finite(a.Ea):
		return fmt.Errorf("arrhenius.ea_j_per_mol %g: want a positive activation energy", a.Ea)
	case a.Rule != dosemap.RuleTrapezoid && a.Rule != dosemap.RuleRectangle:
		return fmt.Errorf("arrhenius.rule %d: want trapezoid or rectangle", int(a.Rule))
	}
	if !(s.ResidualWarnC >= 0) || !finite(s.ResidualWarnC) || s.ResidualWarnC > MaxResidualWarnC {
		return fmt.Errorf("residual_warn_c %g °C: want 0 to %g °C", s.ResidualWarnC, MaxResidualWarnC)
	}
	if !(s.FocalLengthMM >= 0 && s.FocalLengthMM <= MaxFocalLengthMM) {
		return fmt.Errorf("focal_length_mm %g mm: want 0 (the longest measured extent) to %g mm", s.FocalLengthMM, MaxFocalLengthMM)
	}
	if !(s.DriftFlagC > 0 && s.DriftFlagC <= MaxDriftFlagC) {
		return fmt.Errorf("drift_flag_c %g °C: want above 0 to %g °C", s.DriftFlagC, MaxDriftFlagC)
	}
	return s.Thermometry.validate()
}

func (t ThermometrySettings) validate() error {
	switch {
	case !(t.AlphaPPMPerC < 0 && t.AlphaPPMPerC >= MinAlphaPPMPerC):
		return fmt.Errorf("thermometry.alpha_ppm_per_c %g: want a negative value down to %g ppm/°C (water: −0.0104)", t.AlphaPPMPerC, MinAlphaPPMPerC)
	case t.PhaseSign != 1 && t.PhaseSign != -1:
		return fmt.Errorf("thermometry.phase_sign %g: want 1 or -1", t.PhaseSign)
	case !(t.B0T >= 0 && t.B0T <= MaxB0T):
		return fmt.Errorf("thermometry.b0_t %g T: want 0 (from the files) to %g T", t.B0T, MaxB0T)
	case !(t.TEms >= 0 && t.TEms <= MaxTEms):
		return fmt.Errorf("thermometry.te_ms %g ms: want 0 (from the files) to %g ms", t.TEms, MaxTEms)
	case !(t.PhaseScale >= 0) || math.IsInf(t.PhaseScale, 0):
		return fmt.Errorf("thermometry.phase_scale_rad %g: want 0 (from the files' tags) or a positive number of radians per stored unit", t.PhaseScale)
	case t.BaselineFrames < 1 || t.BaselineFrames > MaxBaselineFrames:
		return fmt.Errorf("thermometry.baseline_frames %d: want 1 to %d", t.BaselineFrames, MaxBaselineFrames)
	case !(t.BodyTempC >= MinBodyTempC && t.BodyTempC <= MaxBodyTempC):
		return fmt.Errorf("thermometry.body_temp_c %g °C: want %g to %g °C", t.BodyTempC, MinBodyTempC, MaxBodyTempC)
	case t.Drift < dosemap.DriftNone || t.Drift > dosemap.DriftPolynomial:
		return fmt.Errorf("thermometry.drift %d: want none, mean or polynomial", int(t.Drift))
	case t.DriftOrder < 0 || t.DriftOrder > MaxDriftOrder:
		return fmt.Errorf("thermometry.drift_order %d: want 0 to %d", t.DriftOrder, MaxDriftOrder)
	case !(t.MinMagnitude >= 0 && t.MinMagnitude < 1):
		return fmt.Errorf("thermometry.min_magnitude %g: want 0 (no check) to below 1", t.MinMagnitude)
	case !(t.MaxMotion >= 0 && t.MaxMotion < 1):
		return fmt.Errorf("thermometry.max_motion %g: want 0 (no check) to below 1", t.MaxMotion)
	}
	if r := t.DriftReference; r != nil {
		unit := func(v dosemap.Vec3) bool { return math.Abs(v.Norm()-1) < 1e-3 }
		if !(r.W > 0 && r.H > 0) || math.IsInf(r.W+r.H, 0) || !unit(r.U) || !unit(r.V) || math.Abs(r.U.Dot(r.V)) > 1e-3 {
			return errors.New("thermometry.drift_reference: want unit, perpendicular u and v and a positive width_mm and height_mm")
		}
	}
	return nil
}

// complete returns s with a zero (left out) CEM43, Arrhenius or
// Thermometry replaced by its default, as a program that sets only
// threshold, margin and model means.
func (s Settings) complete() Settings {
	d := DefaultSettings()
	if s.CEM43 == (dosemap.CEM43{}) {
		s.CEM43 = d.CEM43
	}
	if s.Arrhenius == (dosemap.Arrhenius{}) {
		s.Arrhenius = d.Arrhenius
	}
	if s.Thermometry == (ThermometrySettings{}) {
		s.Thermometry = d.Thermometry
		if s.ResidualWarnC == 0 {
			s.ResidualWarnC = d.ResidualWarnC // also left out
		}
	}
	if s.DriftFlagC == 0 {
		s.DriftFlagC = d.DriftFlagC
	}
	return s
}

// thermometry computes the temperature series of so with t.
func thermometry(so *dosemap.Sonication, t ThermometrySettings) (*dosemap.TemperatureSeries, error) {
	o, err := t.Options(so.Geometry)
	if err != nil {
		return nil, err
	}
	return dosemap.Thermometry(so, o)
}

// info summarises t for Result.Thermometry.
func (t ThermometrySettings) info() ThermometryInfo {
	ti := ThermometryInfo{AlphaPPMPerC: t.AlphaPPMPerC, BaselineFrames: t.BaselineFrames, BodyTempC: t.BodyTempC,
		Drift: t.Drift.String(), DriftOrder: t.DriftOrder, Reference: "automatic",
		MinMagnitude: t.MinMagnitude, MaxMotion: t.MaxMotion}
	if t.B0T != 0 {
		ti.B0T = opt(t.B0T)
	}
	if t.TEms != 0 {
		ti.TES = opt(t.TEms / 1000)
	}
	if t.DriftReference != nil {
		ti.Reference = "given"
	}
	return ti
}

// normalized returns s with the exclusions sorted and an empty list as
// nil, the form that is hashed and compared.
func (s Settings) normalized() Settings {
	if len(s.Excluded) == 0 {
		s.Excluded = nil
	} else {
		s.Excluded = slices.Clone(s.Excluded)
		slices.Sort(s.Excluded)
	}
	if r := s.Thermometry.DriftReference; r != nil {
		c := *r
		s.Thermometry.DriftReference = &c
	}
	return s
}

// JSON returns the settings as the "settings" object of a Result writes
// them (exclusions sorted). Settings that JSON cannot hold (NaN, unknown
// methods; Validate refuses them) give an object with the key "invalid"
// holding the Go form of the settings.
func (s Settings) JSON() []byte {
	b, err := json.Marshal(s.normalized())
	if err != nil {
		b, _ = json.Marshal(map[string]string{"invalid": fmt.Sprintf("%+v", s.normalized()), "error": err.Error()})
	}
	return b
}

// Hash returns the SHA-256, in hex, of the settings' JSON: every field
// counts, so two analyses share a hash only when every choice was the
// same.
func (s Settings) Hash() string {
	h := sha256.Sum256(s.JSON())
	return hex.EncodeToString(h[:])
}

// Equal reports whether s and t are the same settings (same Hash).
func (s Settings) Equal(t Settings) bool {
	return bytes.Equal(s.JSON(), t.JSON())
}

// ReadSettings reads settings in the layout of a Result's "settings"
// object from r (name names the source in errors): keys left out keep
// base's values, unknown keys are refused, and the result is validated.
// A threshold left out while the model changes takes the new model's
// default threshold.
func ReadSettings(r io.Reader, name string, base Settings) (Settings, error) {
	b, err := io.ReadAll(io.LimitReader(r, maxSettingsFile+1))
	if err != nil {
		return base, fmt.Errorf("settings file %s: %w", name, err)
	}
	if len(b) > maxSettingsFile {
		return base, fmt.Errorf("settings file %s: larger than %d bytes; not a settings file", name, maxSettingsFile)
	}
	s := base
	s.Excluded = slices.Clone(base.Excluded)
	if r := base.Thermometry.DriftReference; r != nil {
		c := *r
		s.Thermometry.DriftReference = &c
	}
	d := json.NewDecoder(bytes.NewReader(b))
	d.DisallowUnknownFields()
	if err := d.Decode(&s); err != nil {
		return base, fmt.Errorf("settings file %s: %w", name, err)
	}
	if _, err := d.Token(); err != io.EOF {
		return base, fmt.Errorf("settings file %s: more than one JSON value", name)
	}
	var keys struct {
		Threshold *float64 `json:"threshold"`
	}
	_ = json.Unmarshal(b, &keys)
	if keys.Threshold == nil && s.Model != base.Model {
		s.Threshold = s.Model.DefaultThreshold()
	}
	if err := s.Validate(); err != nil {
		return base, fmt.Errorf("settings file %s: %w", name, err)
	}
	return s, nil
}

// LoadSettings reads a settings file (see ReadSettings) onto
// DefaultSettings.
func LoadSettings(path string) (Settings, error) {
	f, err := os.Open(path)
	if err != nil {
		var pe *fs.PathError
		if errors.As(err, &pe) {
			err = pe.Err
		}
		return DefaultSettings(), fmt.Errorf("settings file %s: %w", path, err)
	}
	defer f.Close()
	return ReadSettings(f, path, DefaultSettings())
}

// Redo is what a change of settings costs.
type Redo int

// What a change of settings needs, cheapest first.
const (
	RedoNothing     Redo = iota // the same settings
	RedoAnalysis                // threshold, margin, exclusions, trials, seed: a prepared Session analyses again
	RedoThermometry             // the dose model or thermometry: Prepare again
	RedoReading                 // the phase scale: read the case files again, then Prepare
)

// Redo returns what changing the settings from old to s needs.
func (s Settings) Redo(old Settings) Redo {
	switch {
	case s.Thermometry.PhaseScale != old.Thermometry.PhaseScale:
		return RedoReading
	case s.NeedsThermometry(old):
		return RedoThermometry
	case !s.Equal(old):
		return RedoAnalysis
	}
	return RedoNothing
}

// NeedsThermometry reports whether analysing with s after old needs new
// thermometry and dose (a new Prepare): the dose model and its parameters
// or any thermometry setting changed, or carry_over.
func (s Settings) NeedsThermometry(old Settings) bool {
	a, b := s.normalized(), old.normalized()
	if a.doseModel() != b.doseModel() {
		return true
	}
	if a.CarryOver != b.CarryOver {
		return true // the dose with or without the residual heat
	}
	ja, _ := json.Marshal(a.Thermometry)
	jb, _ := json.Marshal(b.Thermometry)
	return !bytes.Equal(ja, jb)
}

// Unit returns the dose unit as shown to people: "CEM43 min" or "Ω".
func (s Settings) Unit() string {
	if s.Model == ModelArrhenius {
		return "Ω"
	}
	return "CEM43 min"
}

// Differences lists, for a person, the settings in which s differs from
// t (sonications left out are not compared): one entry per setting, as
// "name: value of s <as>, value of t <ts>", named as sign-offs name them.
func (s Settings) Differences(t Settings, as, ts string) []string {
	return diffSettingsJSON(s.JSON(), t.JSON(), as, ts)
}

// Describe is a one-line summary of the settings for people, shown beside
// the figures and written into exports and sign-offs.
func (s Settings) Describe() string {
	num := func(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }
	model := fmt.Sprintf("CEM43 (R %.3g ≥ %.3g °C, %.3g below, %s rule)", s.CEM43.RAbove, s.CEM43.Break, s.CEM43.RBelow, s.CEM43.Rule)
	if s.Model == ModelArrhenius {
		name := s.Arrhenius.Tissue
		if name == "" {
			name = "custom"
		}
		model = fmt.Sprintf("Arrhenius %s (A %.3g s⁻¹, Ea %.4g J/mol, %s rule)", name, s.Arrhenius.A, s.Arrhenius.Ea, s.Arrhenius.Rule)
	}
	t := s.Thermometry
	drift := t.Drift.String()
	if t.Drift == dosemap.DriftPolynomial {
		drift = fmt.Sprintf("polynomial order %d", t.DriftOrder)
	}
	if t.Drift != dosemap.DriftNone {
		ref := "automatic reference region"
		if t.DriftReference != nil {
			ref = fmt.Sprintf("reference region drawn, %.0f × %.0f mm", t.DriftReference.W, t.DriftReference.H)
		}
		drift += " (" + ref + ")"
	}
	out := fmt.Sprintf("Threshold %s %s · margin %g mm · %s · PRF α %g ppm/°C · body %g °C · %d baseline frames · drift %s",
		num(s.Threshold), s.Unit(), s.MarginMM, model, t.AlphaPPMPerC, t.BodyTempC, t.BaselineFrames, drift)
	if t.B0T > 0 {
		out += fmt.Sprintf(" · B0 %g T", t.B0T)
	}
	if t.TEms > 0 {
		out += fmt.Sprintf(" · TE %g ms", t.TEms)
	}
	if t.PhaseScale > 0 {
		out += fmt.Sprintf(" · phase scale %g rad/unit", t.PhaseScale)
	}
	if s.Trials > 0 {
		out += fmt.Sprintf(" · %d noise trials (seed %d)", s.Trials, s.Seed)
	}
	if len(s.Excluded) > 0 {
		out += fmt.Sprintf(" · sonications left out %v", s.normalized().Excluded)
	}
	if s.NegligibleFraction != DefaultNegligibleFraction {
		out += fmt.Sprintf(" · negligible dose %g %% of the threshold", 100*s.NegligibleFraction)
	}
	if s.FocalLengthMM > 0 {
		out += fmt.Sprintf(" · focal length %g mm", s.FocalLengthMM)
	}
	if s.DriftFlagC != DefaultDriftFlagC {
		out += fmt.Sprintf(" · drift flagged above %g °C", s.DriftFlagC)
	}
	if s.CarryOver {
		out += " · residual heat of earlier sonications added (carry-over)"
	}
	return out
}

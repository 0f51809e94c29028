//go:build cgo

package main

import (
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"

	"dosecover/dosemap"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/widget"
)

// analysisSettings are the analysis choices the user can make. They are
// kept in the application preferences (the user's defaults) and in the
// review record of each case (what was used for that case).
type analysisSettings struct {
	Threshold float64 `json:"threshold"` // lethal dose in the model's unit
	MarginMM  float64 `json:"margin_mm"` // safety margin around the target
	Model     string  `json:"model"`     // "cem43" or "arrhenius"

	CEM43Break  float64 `json:"cem43_break_c"` // °C where R changes
	CEM43RAbove float64 `json:"cem43_r_above"` // R at or above the break
	CEM43RBelow float64 `json:"cem43_r_below"` // R below the break

	ArrheniusSet string  `json:"arrhenius_set"` // name of the parameter set
	ArrheniusA   float64 `json:"arrhenius_a"`   // frequency factor, s^-1
	ArrheniusEa  float64 `json:"arrhenius_ea"`  // activation energy, J/mol

	PRFAlpha       float64 `json:"prf_alpha_ppm_per_c"`
	BodyTemp       float64 `json:"body_temp_c"`
	BaselineFrames int     `json:"baseline_frames"`
	Drift          string  `json:"drift"` // "none", "mean" or "polynomial"
	DriftOrder     int     `json:"drift_order"`

	PhaseScale float64 `json:"phase_scale"` // rad per stored unit; 0: from the tags
	B0         float64 `json:"b0_t"`        // tesla; 0: from the files
	TEms       float64 `json:"te_ms"`       // ms; 0: from the files

	Trials int `json:"trials"` // noise trials for the uncertainty band; 0: none

	// DriftRef, when set, is the drift reference region drawn on the
	// acquisition view: every thermometry voxel whose centre projects into
	// the rectangle (on any slice). nil: chosen automatically.
	DriftRef *refRect `json:"drift_reference,omitempty"`

	Excluded []int `json:"excluded,omitempty"` // sonication numbers left out
}

// defaultSettings returns the defaults; the analysis backend replaces it
// with one taking the analysis package's own defaults.
var defaultSettings = builtinSettings

// builtinSettings are the defaults of the window's own fields.
func builtinSettings() analysisSettings {
	return analysisSettings{
		// 240 CEM43: Sapareto & Dewey 1984; McDannold et al., Radiology 2006.
		Threshold: 240, MarginMM: 5, Model: "cem43",
		// R = 0.5 at or above 43 °C, 0.25 below (Sapareto & Dewey 1984).
		CEM43Break: 43, CEM43RAbove: 0.5, CEM43RBelow: 0.25,
		// PRF coefficient -0.01 ppm/°C (Ishihara et al., MRM 1995, common practice).
		PRFAlpha: -0.01, BodyTemp: 37, BaselineFrames: 2, Drift: "mean", DriftOrder: 1,
		Trials: 50,
	}
}

// arrheniusSet is a named set of Arrhenius parameters offered in the
// settings dialog. The backend fills the list from the dose engine.
type arrheniusSet struct {
	Name  string
	A, Ea float64
}

var arrheniusSets []arrheniusSet

const prefSettings = "settings.v1"

// loadPrefSettings returns the user's saved defaults, or the built-in ones.
func loadPrefSettings(p fyne.Preferences) analysisSettings {
	s := defaultSettings()
	if js := p.String(prefSettings); js != "" {
		var saved analysisSettings
		if json.Unmarshal([]byte(js), &saved) == nil && saved.validate() == nil {
			saved.Excluded = nil // exclusions belong to one case, not to the defaults
			s = saved
		}
	}
	return s
}

func savePrefSettings(p fyne.Preferences, s analysisSettings) {
	s.Excluded = nil
	if js, err := json.Marshal(s); err == nil {
		p.SetString(prefSettings, string(js))
	}
}

// validate reports the first setting that cannot be used.
func (s analysisSettings) validate() error {
	pos := func(name string, v float64) error {
		if !(v > 0) || math.IsInf(v, 0) {
			return fmt.Errorf("%s must be a positive number (got %g)", name, v)
		}
		return nil
	}
	if err := pos("threshold", s.Threshold); err != nil {
		return err
	}
	if s.MarginMM < 0 || math.IsNaN(s.MarginMM) {
		return fmt.Errorf("margin must be zero or more millimetres (got %g)", s.MarginMM)
	}
	switch s.Model {
	case "cem43":
		if err := pos("CEM43 R above the break", s.CEM43RAbove); err != nil {
			return err
		}
		if err := pos("CEM43 R below the break", s.CEM43RBelow); err != nil {
			return err
		}
		if s.CEM43Break < 30 || s.CEM43Break > 50 {
			return fmt.Errorf("CEM43 break temperature %g °C is outside 30–50 °C", s.CEM43Break)
		}
	case "arrhenius":
		if err := pos("Arrhenius frequency factor A", s.ArrheniusA); err != nil {
			return err
		}
		if err := pos("Arrhenius activation energy Ea", s.ArrheniusEa); err != nil {
			return err
		}
	default:
		return fmt.Errorf("unknown dose model %q (cem43 or arrhenius)", s.Model)
	}
	if s.PRFAlpha >= 0 || s.PRFAlpha < -0.1 {
		return fmt.Errorf("PRF coefficient %g ppm/°C must be negative and above -0.1 (water: -0.0104)", s.PRFAlpha)
	}
	if s.BodyTemp < 20 || s.BodyTemp > 45 {
		return fmt.Errorf("body temperature %g °C is outside 20–45 °C", s.BodyTemp)
	}
	if s.BaselineFrames < 1 {
		return fmt.Errorf("at least one baseline frame is needed (got %d)", s.BaselineFrames)
	}
	switch s.Drift {
	case "none", "mean":
	case "polynomial":
		if s.DriftOrder < 1 || s.DriftOrder > 4 {
			return fmt.Errorf("drift polynomial order %d is outside 1–4", s.DriftOrder)
		}
	default:
		return fmt.Errorf("unknown drift correction %q", s.Drift)
	}
	if s.Trials < 0 || s.Trials > 1000 {
		return fmt.Errorf("noise trials %d are outside 0–1000", s.Trials)
	}
	if s.PhaseScale < 0 || s.B0 < 0 || s.TEms < 0 {
		return fmt.Errorf("phase scale, B0 and TE must not be negative")
	}
	if s.B0 > 12 {
		return fmt.Errorf("B0 %g T is not a clinical field strength", s.B0)
	}
	return nil
}

// refRect is a rectangle in patient space: corner Origin, unit edge
// directions U and V, extents W and H (mm).
type refRect struct {
	Origin dosemap.Vec3 `json:"origin_mm"`
	U      dosemap.Vec3 `json:"u"`
	V      dosemap.Vec3 `json:"v"`
	W      float64      `json:"width_mm"`
	H      float64      `json:"height_mm"`
}

// newRefRect returns the rectangle spanned by corners a and b in the plane
// with in-plane directions u and v.
func newRefRect(a, b, u, v dosemap.Vec3) *refRect {
	d := b.Sub(a)
	du, dv := d.Dot(u), d.Dot(v)
	o := a
	if du < 0 {
		o, du = o.Add(u.Scale(du)), -du
	}
	if dv < 0 {
		o, dv = o.Add(v.Scale(dv)), -dv
	}
	return &refRect{Origin: o, U: u, V: v, W: du, H: dv}
}

// corners returns the four corners in drawing order.
func (r *refRect) corners() [4]dosemap.Vec3 {
	return [4]dosemap.Vec3{r.Origin, r.Origin.Add(r.U.Scale(r.W)), r.Origin.Add(r.U.Scale(r.W)).Add(r.V.Scale(r.H)), r.Origin.Add(r.V.Scale(r.H))}
}

// mask returns the voxels of g whose centres project into r.
func (r *refRect) mask(g dosemap.Geometry) ([]bool, int) {
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

// excludedSet returns the excluded sonication numbers as a set.
func (s analysisSettings) excludedSet() map[int]bool {
	m := map[int]bool{}
	for _, n := range s.Excluded {
		m[n] = true
	}
	return m
}

// unitName returns the display unit of the chosen model.
func (s analysisSettings) unitName() string {
	if s.Model == "arrhenius" {
		return "Ω"
	}
	return "CEM43 min"
}

// describe is a one-line summary of the thresholds used, shown beside the
// metrics and written into exports.
func (s analysisSettings) describe() string {
	model := fmt.Sprintf("CEM43 (R %.3g ≥ %.3g °C, %.3g below)", s.CEM43RAbove, s.CEM43Break, s.CEM43RBelow)
	if s.Model == "arrhenius" {
		name := s.ArrheniusSet
		if name == "" {
			name = "custom"
		}
		model = fmt.Sprintf("Arrhenius %s (A %.3g s⁻¹, Ea %.4g J/mol)", name, s.ArrheniusA, s.ArrheniusEa)
	}
	drift := s.Drift
	if drift == "polynomial" {
		drift = fmt.Sprintf("polynomial order %d", s.DriftOrder)
	}
	ref := "automatic reference region"
	if s.DriftRef != nil {
		ref = fmt.Sprintf("reference region drawn, %.0f × %.0f mm", s.DriftRef.W, s.DriftRef.H)
	}
	return fmt.Sprintf("Threshold %s %s · margin %g mm · %s · PRF α %g ppm/°C · body %g °C · %d baseline frames · drift %s (%s)",
		fmtNum(s.Threshold), s.unitName(), s.MarginMM, model, s.PRFAlpha, s.BodyTemp, s.BaselineFrames, drift, ref)
}

func fmtNum(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }

// floatEntry is an entry that holds one number.
func floatEntry(v float64) *widget.Entry {
	e := widget.NewEntry()
	if v != 0 {
		e.SetText(strconv.FormatFloat(v, 'g', -1, 64))
	}
	return e
}

func parseFloatField(name, text string, dst *float64) error {
	text = strings.TrimSpace(strings.ReplaceAll(text, ",", "."))
	if text == "" {
		*dst = 0
		return nil
	}
	v, err := strconv.ParseFloat(text, 64)
	if err != nil {
		return fmt.Errorf("%s: %q is not a number", name, text)
	}
	*dst = v
	return nil
}

// showSettingsDialog lets the user change the analysis settings. note, when
// not empty, is shown at the top (for example to ask for a missing B0).
// apply receives the new settings when the user accepts them.
func showSettingsDialog(w fyne.Window, cur analysisSettings, note string, apply func(analysisSettings)) {
	threshold := floatEntry(cur.Threshold)
	margin := floatEntry(cur.MarginMM)
	model := widget.NewSelect([]string{"CEM43 (Sapareto–Dewey)", "Arrhenius damage integral"}, nil)
	brk := floatEntry(cur.CEM43Break)
	rAbove := floatEntry(cur.CEM43RAbove)
	rBelow := floatEntry(cur.CEM43RBelow)
	setNames := []string{"custom"}
	for _, a := range arrheniusSets {
		setNames = append(setNames, a.Name)
	}
	arrA := floatEntry(cur.ArrheniusA)
	arrEa := floatEntry(cur.ArrheniusEa)
	arrSet := widget.NewSelect(setNames, func(name string) {
		for _, a := range arrheniusSets {
			if a.Name == name {
				arrA.SetText(strconv.FormatFloat(a.A, 'g', -1, 64))
				arrEa.SetText(strconv.FormatFloat(a.Ea, 'g', -1, 64))
			}
		}
	})
	if cur.ArrheniusSet != "" {
		arrSet.SetSelected(cur.ArrheniusSet)
	} else {
		arrSet.SetSelected("custom")
	}
	cemBox := widget.NewForm(
		widget.NewFormItem("Break temperature (°C)", brk),
		widget.NewFormItem("R at or above the break", rAbove),
		widget.NewFormItem("R below the break", rBelow),
	)
	arrBox := widget.NewForm(
		widget.NewFormItem("Parameter set", arrSet),
		widget.NewFormItem("A (s⁻¹)", arrA),
		widget.NewFormItem("Ea (J/mol)", arrEa),
	)
	model.OnChanged = func(v string) {
		if strings.HasPrefix(v, "Arrhenius") {
			cemBox.Hide()
			arrBox.Show()
		} else {
			arrBox.Hide()
			cemBox.Show()
		}
	}
	if cur.Model == "arrhenius" {
		model.SetSelectedIndex(1)
	} else {
		model.SetSelectedIndex(0)
	}
	alpha := floatEntry(cur.PRFAlpha)
	body := floatEntry(cur.BodyTemp)
	baseline := widget.NewEntry()
	baseline.SetText(strconv.Itoa(cur.BaselineFrames))
	drift := widget.NewSelect([]string{"none", "mean", "polynomial"}, nil)
	drift.SetSelected(cur.Drift)
	order := widget.NewEntry()
	order.SetText(strconv.Itoa(cur.DriftOrder))
	phase := floatEntry(cur.PhaseScale)
	phase.SetPlaceHolder("from the files")
	b0 := floatEntry(cur.B0)
	b0.SetPlaceHolder("from the files")
	te := floatEntry(cur.TEms)
	te.SetPlaceHolder("from the files")

	trials := widget.NewEntry()
	trials.SetText(strconv.Itoa(cur.Trials))

	errLabel := widget.NewLabel("")
	errLabel.Wrapping = fyne.TextWrapWord
	errLabel.Importance = widget.DangerImportance

	form := widget.NewForm(
		widget.NewFormItem("Lethal threshold", threshold),
		widget.NewFormItem("Safety margin (mm)", margin),
		widget.NewFormItem("Dose model", model),
		widget.NewFormItem("Noise trials for the band (0: none)", trials),
	)
	thermo := widget.NewForm(
		widget.NewFormItem("PRF coefficient α (ppm/°C)", alpha),
		widget.NewFormItem("Body temperature (°C)", body),
		widget.NewFormItem("Baseline frames", baseline),
		widget.NewFormItem("Drift correction", drift),
		widget.NewFormItem("Drift polynomial order", order),
		widget.NewFormItem("Phase scale (rad per stored unit)", phase),
		widget.NewFormItem("Field strength B0 (T)", b0),
		widget.NewFormItem("Echo time TE (ms)", te),
	)
	driftNote := widget.NewLabel("Drift is measured in an unheated reference region: chosen automatically (voxels away from the heating), or drawn as a rectangle on the left image (Review ▸ Draw drift reference).")
	driftNote.Wrapping = fyne.TextWrapWord
	top := []fyne.CanvasObject{}
	if note != "" {
		n := widget.NewLabel(note)
		n.Wrapping = fyne.TextWrapWord
		n.Importance = widget.WarningImportance
		top = append(top, n)
	}
	content := container.NewVBox(append(top,
		widget.NewLabelWithStyle("Dose", fyne.TextAlignLeading, fyne.TextStyle{Bold: true}),
		form, cemBox, arrBox,
		widget.NewSeparator(),
		widget.NewLabelWithStyle("Thermometry", fyne.TextAlignLeading, fyne.TextStyle{Bold: true}),
		thermo, driftNote, errLabel)...)

	var d dialog.Dialog
	collect := func() (analysisSettings, error) {
		s := cur
		var err error
		for _, f := range []struct {
			name string
			e    *widget.Entry
			dst  *float64
		}{
			{"threshold", threshold, &s.Threshold}, {"margin", margin, &s.MarginMM},
			{"break temperature", brk, &s.CEM43Break}, {"R above", rAbove, &s.CEM43RAbove}, {"R below", rBelow, &s.CEM43RBelow},
			{"A", arrA, &s.ArrheniusA}, {"Ea", arrEa, &s.ArrheniusEa},
			{"PRF coefficient", alpha, &s.PRFAlpha}, {"body temperature", body, &s.BodyTemp},
			{"phase scale", phase, &s.PhaseScale}, {"B0", b0, &s.B0}, {"TE", te, &s.TEms},
		} {
			if err = parseFloatField(f.name, f.e.Text, f.dst); err != nil {
				return s, err
			}
		}
		if s.BaselineFrames, err = strconv.Atoi(strings.TrimSpace(baseline.Text)); err != nil {
			return s, fmt.Errorf("baseline frames: %q is not a whole number", baseline.Text)
		}
		if s.Trials, err = strconv.Atoi(strings.TrimSpace(trials.Text)); err != nil {
			return s, fmt.Errorf("noise trials: %q is not a whole number", trials.Text)
		}
		if s.DriftOrder, err = strconv.Atoi(strings.TrimSpace(order.Text)); err != nil {
			return s, fmt.Errorf("drift order: %q is not a whole number", order.Text)
		}
		s.Model = "cem43"
		if model.SelectedIndex() == 1 {
			s.Model = "arrhenius"
			s.ArrheniusSet = arrSet.Selected
			if s.ArrheniusSet == "custom" {
				s.ArrheniusSet = ""
			}
		}
		s.Drift = drift.Selected
		return s, s.validate()
	}
	reset := widget.NewButton("Built-in defaults", func() {
		d.Hide()
		def := defaultSettings()
		def.Excluded = cur.Excluded
		showSettingsDialog(w, def, note, apply)
	})
	ok := widget.NewButton("Apply", func() {
		s, err := collect()
		if err != nil {
			errLabel.SetText(err.Error())
			return
		}
		d.Hide()
		apply(s)
	})
	ok.Importance = widget.HighImportance
	cancel := widget.NewButton("Cancel", func() { d.Hide() })
	body2 := container.NewBorder(nil, container.NewHBox(reset, widget.NewLabel(""), cancel, ok), nil, nil,
		container.NewVScroll(content))
	d = dialog.NewCustomWithoutButtons("Analysis settings", body2, w)
	d.Resize(fyne.NewSize(560, 720))
	d.Show()
}

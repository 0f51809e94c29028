//go:build cgo

package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"strconv"
	"strings"

	"dosecover/dosemap"
	"dosecover/review"

	"fyne.io/fyne/v2"
	"fyne.io/fyne/v2/container"
	"fyne.io/fyne/v2/dialog"
	"fyne.io/fyne/v2/storage"
	"fyne.io/fyne/v2/widget"
)

// The window's analysis settings are review.Settings: the user's defaults
// live in the application preferences, the settings of each case in its
// review record (record.go), both as the JSON of review.Settings.

// prefSettings is the preferences key of the user's default settings;
// prefSettingsV1 the key of the window's earlier layout, still read.
const (
	prefSettings   = "settings.v2"
	prefSettingsV1 = "settings.v1"
)

// loadPrefSettings returns the user's saved defaults, or the built-in ones.
func loadPrefSettings(p fyne.Preferences) review.Settings {
	if js := p.String(prefSettings); js != "" {
		s, err := review.ReadSettings(strings.NewReader(js), "preferences", review.DefaultSettings())
		if err != nil {
			return review.DefaultSettings()
		}
		s.Excluded = nil // exclusions belong to one case, not to the defaults
		return s
	}
	if js := p.String(prefSettingsV1); js != "" {
		if s, err := readLegacySettings([]byte(js)); err == nil {
			s.Excluded = nil
			return s
		}
	}
	return review.DefaultSettings()
}

func savePrefSettings(p fyne.Preferences, s review.Settings) {
	s.Excluded = nil
	p.SetString(prefSettings, string(s.JSON()))
}

// excludedSet returns the excluded sonication numbers of s as a set.
func excludedSet(s review.Settings) map[int]bool {
	m := map[int]bool{}
	for _, n := range s.Excluded {
		m[n] = true
	}
	return m
}

func fmtNum(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }

// floatEntry is a dialog's entry that holds one number.
func floatEntry(v float64) *dialogEntry {
	e := newDialogEntry()
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

// dialogNames are the settings dialog's names of the settings' JSON keys,
// which review.Settings.Validate names in its messages.
var dialogNames = map[string]string{
	"threshold": "Lethal threshold", "margin_mm": "Safety margin", "trials": "Noise trials",
	"cem43.break_c": "Break temperature", "cem43.r_above": "R at or above the break", "cem43.r_below": "R below the break",
	"arrhenius.a_per_s": "A", "arrhenius.ea_j_per_mol": "Ea",
	"thermometry.alpha_ppm_per_c": "PRF coefficient α", "thermometry.body_temp_c": "Body temperature",
	"thermometry.baseline_frames": "Baseline frames", "thermometry.drift_order": "Drift polynomial order",
	"thermometry.phase_scale_rad": "Phase scale", "thermometry.b0_t": "Field strength B0", "thermometry.te_ms": "Echo time TE",
	"focal_length_mm": "Focal length along the beam", "drift_flag_c": "Flag drift removed above",
	"negligible_fraction": "Negligible dose fraction", "residual_warn_c": "Residual heat warning",
}

// plainSettingsError returns err with the setting it names by its JSON
// key named as the dialog names it.
func plainSettingsError(err error) error {
	if err == nil {
		return nil
	}
	msg := err.Error()
	if key, rest, ok := strings.Cut(msg, " "); ok {
		if name, known := dialogNames[key]; known {
			return fmt.Errorf("%s %s", name, rest)
		}
	}
	return err
}

// showSettingsDialog lets the user change the analysis settings. note, when
// not empty, is shown at the top (for example to ask for a missing B0).
// apply receives the new settings when the user accepts them.
//
// origin says where the values shown come from (this case's record, your
// defaults) and how they compare; "" says nothing.
func showSettingsDialog(w fyne.Window, cur review.Settings, note, origin string, apply func(review.Settings)) {
	threshold := floatEntry(cur.Threshold)
	margin := floatEntry(cur.MarginMM)
	model := widget.NewSelect([]string{"CEM43 (Sapareto–Dewey)", "Arrhenius damage integral"}, nil)
	brk := floatEntry(cur.CEM43.Break)
	rAbove := floatEntry(cur.CEM43.RAbove)
	rBelow := floatEntry(cur.CEM43.RBelow)
	setNames := []string{"custom"}
	for _, a := range dosemap.ArrheniusSets {
		setNames = append(setNames, a.Tissue)
	}
	arrA := floatEntry(cur.Arrhenius.A)
	arrEa := floatEntry(cur.Arrhenius.Ea)
	arrSet := widget.NewSelect(setNames, func(name string) {
		for _, a := range dosemap.ArrheniusSets {
			if a.Tissue == name {
				arrA.SetText(strconv.FormatFloat(a.A, 'g', -1, 64))
				arrEa.SetText(strconv.FormatFloat(a.Ea, 'g', -1, 64))
			}
		}
	})
	if _, known := dosemap.ArrheniusSet(cur.Arrhenius.Tissue); known {
		arrSet.SetSelected(cur.Arrhenius.Tissue)
	} else {
		arrSet.SetSelected("custom")
	}
	units := map[string]*widget.Label{}
	cemBox := settingsForm(units,
		widget.NewFormItem("Break temperature (°C)", brk),
		widget.NewFormItem("R at or above the break (no unit)", rAbove),
		widget.NewFormItem("R below the break (no unit)", rBelow),
	)
	arrBox := settingsForm(units,
		widget.NewFormItem("Parameter set", arrSet),
		widget.NewFormItem("A (s⁻¹)", arrA),
		widget.NewFormItem("Ea (J/mol)", arrEa),
	)
	model.OnChanged = func(v string) {
		unit := "CEM43 min"
		if strings.HasPrefix(v, "Arrhenius") {
			cemBox.Hide()
			arrBox.Show()
			unit = "Ω (no unit)"
		} else {
			arrBox.Hide()
			cemBox.Show()
		}
		if u := units["Lethal threshold"]; u != nil {
			u.SetText(unit)
		}
	}
	if cur.Model == review.ModelArrhenius {
		model.SetSelectedIndex(1)
	} else {
		model.SetSelectedIndex(0)
	}
	rule := widget.NewSelect([]string{dosemap.RuleTrapezoid.String(), dosemap.RuleRectangle.String()}, nil)
	rule.SetSelected(cur.CEM43.Rule.String())
	if cur.Model == review.ModelArrhenius {
		rule.SetSelected(cur.Arrhenius.Rule.String())
	}
	th := cur.Thermometry
	alpha := floatEntry(th.AlphaPPMPerC)
	body := floatEntry(th.BodyTempC)
	baseline := newDialogEntry()
	baseline.SetText(strconv.Itoa(th.BaselineFrames))
	drift := widget.NewSelect([]string{"none", "mean", "polynomial"}, nil)
	drift.SetSelected(th.Drift.String())
	order := newDialogEntry()
	order.SetText(strconv.Itoa(th.DriftOrder))
	phase := floatEntry(th.PhaseScale)
	phase.SetPlaceHolder("from the files")
	b0 := floatEntry(th.B0T)
	b0.SetPlaceHolder("from the files")
	te := floatEntry(th.TEms)
	te.SetPlaceHolder("from the files")

	trials := newDialogEntry()
	trials.SetText(strconv.Itoa(cur.Trials))

	errLabel := widget.NewLabel("")
	errLabel.Wrapping = fyne.TextWrapWord
	errLabel.Importance = widget.DangerImportance

	form := settingsForm(units,
		widget.NewFormItem("Lethal threshold (CEM43 min)", threshold),
		widget.NewFormItem("Safety margin (mm)", margin),
		widget.NewFormItem("Dose model", model),
		widget.NewFormItem("Time integration", rule),
		widget.NewFormItem("Noise trials for the band (trials; 0: none)", trials),
	)
	thermo := settingsForm(units,
		widget.NewFormItem("PRF coefficient α (ppm/°C)", alpha),
		widget.NewFormItem("Body temperature (°C)", body),
		widget.NewFormItem("Baseline (frames)", baseline),
		widget.NewFormItem("Drift correction", drift),
		widget.NewFormItem("Drift polynomial order (no unit)", order),
		widget.NewFormItem("Phase scale (rad per stored unit)", phase),
		widget.NewFormItem("Field strength B0 (T)", b0),
		widget.NewFormItem("Echo time TE (ms)", te),
	)
	model.OnChanged(model.Selected) // the threshold's unit follows the model
	focal := floatEntry(cur.FocalLengthMM)
	focal.SetPlaceHolder("0: each sonication's longest measured extent")
	driftFlag := floatEntry(cur.DriftFlagC)
	review2 := settingsForm(units,
		widget.NewFormItem("Focal length along the beam (mm)", focal),
		widget.NewFormItem("Flag drift removed above (°C)", driftFlag),
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
	if origin != "" {
		o := widget.NewLabel(origin)
		o.Wrapping = fyne.TextWrapWord
		top = append(top, o)
	}
	content := container.NewVBox(append(top,
		widget.NewLabelWithStyle("Dose", fyne.TextAlignLeading, fyne.TextStyle{Bold: true}),
		form, cemBox, arrBox,
		widget.NewSeparator(),
		widget.NewLabelWithStyle("Thermometry", fyne.TextAlignLeading, fyne.TextStyle{Bold: true}),
		thermo, driftNote,
		widget.NewSeparator(),
		widget.NewLabelWithStyle("Monitoring and flags", fyne.TextAlignLeading, fyne.TextStyle{Bold: true}),
		review2, errLabel)...)

	var d dialog.Dialog
	collect := func() (review.Settings, error) {
		s := cur
		var err error
		for _, f := range []struct {
			name string
			e    *dialogEntry
			dst  *float64
		}{
			{"threshold", threshold, &s.Threshold}, {"margin", margin, &s.MarginMM},
			{"break temperature", brk, &s.CEM43.Break}, {"R above", rAbove, &s.CEM43.RAbove}, {"R below", rBelow, &s.CEM43.RBelow},
			{"A", arrA, &s.Arrhenius.A}, {"Ea", arrEa, &s.Arrhenius.Ea},
			{"PRF coefficient", alpha, &s.Thermometry.AlphaPPMPerC}, {"body temperature", body, &s.Thermometry.BodyTempC},
			{"phase scale", phase, &s.Thermometry.PhaseScale}, {"B0", b0, &s.Thermometry.B0T}, {"TE", te, &s.Thermometry.TEms},
			{"focal length", focal, &s.FocalLengthMM}, {"drift flag", driftFlag, &s.DriftFlagC},
		} {
			if err = parseFloatField(f.name, f.e.Text, f.dst); err != nil {
				return s, err
			}
		}
		if s.Thermometry.BaselineFrames, err = strconv.Atoi(strings.TrimSpace(baseline.Text)); err != nil {
			return s, fmt.Errorf("baseline frames: %q is not a whole number", baseline.Text)
		}
		if s.Trials, err = strconv.Atoi(strings.TrimSpace(trials.Text)); err != nil {
			return s, fmt.Errorf("noise trials: %q is not a whole number", trials.Text)
		}
		if s.Thermometry.DriftOrder, err = strconv.Atoi(strings.TrimSpace(order.Text)); err != nil {
			return s, fmt.Errorf("drift order: %q is not a whole number", order.Text)
		}
		s.Model = review.ModelCEM43
		if model.SelectedIndex() == 1 {
			s.Model = review.ModelArrhenius
			s.Arrhenius.Tissue, s.Arrhenius.Source = "", "entered by the user"
			if set, known := dosemap.ArrheniusSet(arrSet.Selected); known && set.A == s.Arrhenius.A && set.Ea == s.Arrhenius.Ea {
				s.Arrhenius.Tissue, s.Arrhenius.Source = set.Tissue, set.Source
			}
		}
		if cur.Model != s.Model {
			// The threshold entered belongs to the other model's unit
			// unless the user changed it.
			if s.Threshold == cur.Threshold {
				s.Threshold = s.Model.DefaultThreshold()
			}
		}
		if s.Thermometry.Drift, err = dosemap.ParseDriftMethod(drift.Selected); err != nil {
			return s, err
		}
		r, err := dosemap.ParseTimeRule(rule.Selected)
		if err != nil {
			return s, err
		}
		s.CEM43.Rule, s.Arrhenius.Rule = r, r
		return s, plainSettingsError(s.Validate())
	}
	reset := widget.NewButton("Built-in defaults", func() {
		d.Hide()
		def := review.DefaultSettings()
		def.Excluded = cur.Excluded
		showSettingsDialog(w, def, note, "Showing the built-in defaults (not yet applied).", apply)
	})
	load := widget.NewButton("Load file…", func() {
		fd := dialog.NewFileOpen(func(r fyne.URIReadCloser, err error) {
			if err != nil || r == nil {
				return
			}
			defer r.Close()
			loaded, err := review.ReadSettings(r, r.URI().Path(), cur)
			if err != nil {
				errLabel.SetText(err.Error())
				return
			}
			d.Hide()
			showSettingsDialog(w, loaded, note, "Showing the settings read from "+r.URI().Name()+" (not yet applied).", apply)
		}, w)
		fd.SetFilter(storage.NewExtensionFileFilter([]string{".json"}))
		fd.Resize(fyne.NewSize(800, 560))
		fd.Show()
	})
	save := widget.NewButton("Save file…", func() {
		s, err := collect()
		if err != nil {
			errLabel.SetText(err.Error())
			return
		}
		fd := dialog.NewFileSave(func(wc fyne.URIWriteCloser, err error) {
			if err != nil || wc == nil {
				return
			}
			var buf bytes.Buffer
			_ = json.Indent(&buf, s.JSON(), "", "  ")
			buf.WriteByte('\n')
			_, err = wc.Write(buf.Bytes())
			if cerr := wc.Close(); err == nil {
				err = cerr
			}
			if err != nil {
				errLabel.SetText(fmt.Sprintf("writing %s: %v", wc.URI().Path(), err))
				return
			}
			errLabel.SetText("Saved " + wc.URI().Path() + " (use it with --settings on the command line).")
		}, w)
		fd.SetFileName("dosecover-settings.json")
		fd.SetFilter(storage.NewExtensionFileFilter([]string{".json"}))
		fd.Resize(fyne.NewSize(800, 560))
		fd.Show()
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
	body2 := container.NewBorder(nil, container.NewHBox(reset, load, save, widget.NewLabel(""), cancel, ok), nil, nil,
		container.NewVScroll(content))
	d = dialog.NewCustomWithoutButtons("Analysis settings", body2, w)
	d.Resize(fyne.NewSize(660, 720))
	showDialog(w, d)
}

// settingsOrigin says which values the settings dialog shows: those of the
// open case (from its review record, or your defaults when it has none)
// and whether your defaults for new cases differ.
func (rw *reviewWindow) settingsOrigin() string {
	if rw.loaded == nil {
		return "No case is open: these are your defaults, used for the next case you open."
	}
	defaults := loadPrefSettings(rw.app.Preferences())
	var b strings.Builder
	if rw.fromRecord {
		b.WriteString("These settings apply to this case: they come from its review record.")
	} else {
		b.WriteString("These settings apply to this case: it has no review record yet, so they are your defaults.")
	}
	cur := rw.settings
	cur.Excluded = defaults.Excluded // left-out sonications belong to the case
	if cur.Equal(defaults) {
		b.WriteString(" Your defaults for new cases are the same.")
	} else {
		b.WriteString(" Your defaults for new cases differ in: " + strings.Join(cur.Differences(defaults, "here", "in your defaults"), "; ") + ".")
	}
	b.WriteString(" Apply re-analyses this case and makes these values your defaults.")
	return b.String()
}

package review

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"reflect"
	"slices"
	"sort"
	"strings"
	"time"

	"dosecover/dosemap"
)

// Outcomes of a sign-off, in the reviewer's plain words.
const (
	OutcomeAccepted      = "coverage accepted"
	OutcomeFollowUp      = "needs follow-up"
	OutcomeNotReviewable = "not reviewable"
)

// Outcomes lists the outcomes a sign-off may record, in the order offered.
var Outcomes = []string{OutcomeAccepted, OutcomeFollowUp, OutcomeNotReviewable}

// Headline holds the figures a reviewer saw when signing off, rounded as
// the report prints them (percent to 0.1, mL to 0.01), so that the same
// analysis run again compares equal. CoveredMonitoredPct is nil (JSON
// null, "not measurable") when no part of the target is monitored.
type Headline struct {
	CoveredMonitoredPct *float64 `json:"covered_percent_of_monitored_target"`
	CoveredTargetPct    float64  `json:"covered_percent_of_whole_target"`
	NotMonitoredPct     float64  `json:"not_monitored_percent"`
	Holes               int      `json:"holes"`
	OutsideMarginML     float64  `json:"lethal_outside_margin_ml"`
	LethalML            float64  `json:"lethal_volume_ml"`
}

// HeadlineOf returns the headline figures of r.
func HeadlineOf(r *Result) Headline {
	pct := func(f float64) float64 { return math.Round(1000*f) / 10 }
	ml := func(v float64) float64 { return math.Round(100*v) / 100 }
	var mon *float64
	if f := r.CoveredFraction; f != nil {
		v := pct(*f)
		mon = &v
	}
	return Headline{
		CoveredMonitoredPct: mon,
		CoveredTargetPct:    pct(r.CoveredFractionOfTarget),
		NotMonitoredPct:     pct(r.NotMonitoredFraction),
		Holes:               len(r.Holes),
		OutsideMarginML:     ml(r.OutsideMarginLethalML),
		LethalML:            ml(r.LethalVolumeML),
	}
}

// SignOff is one reviewer's statement about the analysis of one case. It
// records everything the statement was made on: the input files (their
// hash), the complete settings, the sonications left out and the headline
// figures. It applies to an analysis only when all of these match
// (Differences).
type SignOff struct {
	Reviewer  string          `json:"reviewer"`
	Outcome   string          `json:"outcome"` // one of Outcomes
	Comment   string          `json:"comment,omitempty"`
	Time      time.Time       `json:"time"`
	InputHash string          `json:"input_sha256"`
	Study     string          `json:"study_uid,omitempty"` // StudyInstanceUID of the study analysed
	Settings  json.RawMessage `json:"settings"`            // SettingsJSON of the analysis
	Excluded  []int           `json:"excluded_sonications"`
	Figures   Headline        `json:"figures"`
	Version   string          `json:"dosecover_version,omitempty"`
}

// SettingsJSON returns the complete settings s (Settings.JSON, thermometry
// included) as canonical JSON (keys sorted, compact): equal settings give
// equal bytes.
func SettingsJSON(s Settings) (json.RawMessage, error) {
	var v any
	if err := json.Unmarshal(s.JSON(), &v); err != nil {
		return nil, fmt.Errorf("encoding the settings: %w", err)
	}
	// encoding/json writes map keys sorted.
	b, err := json.Marshal(v)
	if err != nil {
		return nil, fmt.Errorf("encoding the settings: %w", err)
	}
	return b, nil
}

// NewSignOff returns the sign-off of the analysis r of the study study
// ("" when unknown) read from the inputs with hash inputHash. The outcome
// must be one of Outcomes and the reviewer named.
func NewSignOff(reviewer, outcome, comment, inputHash, study string, r *Result, at time.Time) (SignOff, error) {
	reviewer, comment = strings.TrimSpace(reviewer), strings.TrimSpace(comment)
	if reviewer == "" {
		return SignOff{}, fmt.Errorf("a sign-off needs the reviewer's name")
	}
	if !slices.Contains(Outcomes, outcome) {
		return SignOff{}, fmt.Errorf("outcome %q: want one of %s", outcome, strings.Join(Outcomes, ", "))
	}
	if inputHash == "" || r == nil {
		return SignOff{}, fmt.Errorf("a sign-off needs an analysis and the hash of its input files")
	}
	set, err := SettingsJSON(r.Settings)
	if err != nil {
		return SignOff{}, err
	}
	return SignOff{
		Reviewer: reviewer, Outcome: outcome, Comment: comment, Time: at.UTC(),
		InputHash: inputHash, Study: study, Settings: set, Excluded: excludedOf(r.Settings),
		Figures: HeadlineOf(r), Version: dosemap.Version,
	}, nil
}

// excludedOf returns the sonications left out, sorted, never nil.
func excludedOf(s Settings) []int {
	ex := append([]int{}, s.Excluded...)
	sort.Ints(ex)
	return slices.Compact(ex)
}

// Differences lists, in words for a person, what differs between the
// analysis the sign-off was made on and the analysis r of study study read
// from the inputs with hash inputHash; none means the sign-off applies to
// r.
func (s SignOff) Differences(inputHash, study string, r *Result) []string {
	var d []string
	if s.InputHash != inputHash {
		d = append(d, fmt.Sprintf("input files differ (SHA-256 %s then, %s now)", short(s.InputHash), short(inputHash)))
	}
	if s.Study != study {
		d = append(d, fmt.Sprintf("another study (%s then, %s now)", orUnknown(s.Study), orUnknown(study)))
	}
	if ex := excludedOf(r.Settings); !slices.Equal(excludedOf(Settings{Excluded: s.Excluded}), ex) {
		d = append(d, fmt.Sprintf("sonications left out: %s then, %s now", intList(s.Excluded), intList(ex)))
	}
	now, err := SettingsJSON(r.Settings)
	if err != nil {
		return append(d, err.Error())
	}
	d = append(d, settingsDiff(withDefaults(s.Settings), now)...)
	h := HeadlineOf(r)
	then := s.Figures.CoveredMonitoredPct
	if then != nil && *then == 0 && s.Figures.NotMonitoredPct == 100 {
		then = nil // written as 0 before "not measurable" had its own value
	}
	if a, b := pctText(then), pctText(h.CoveredMonitoredPct); a != b {
		d = append(d, fmt.Sprintf("covered, of the monitored target: %s then, %s now", a, b))
	}
	for _, f := range []struct {
		name      string
		then, now float64
		unit      string
	}{
		{"covered, of the whole target", s.Figures.CoveredTargetPct, h.CoveredTargetPct, "%"},
		{"not monitored", s.Figures.NotMonitoredPct, h.NotMonitoredPct, "%"},
		{"holes", float64(s.Figures.Holes), float64(h.Holes), ""},
		{"lethal outside the margin", s.Figures.OutsideMarginML, h.OutsideMarginML, "mL"},
		{"lethal volume", s.Figures.LethalML, h.LethalML, "mL"},
	} {
		if f.then != f.now {
			v := func(x float64) string { return strings.TrimSpace(fmt.Sprintf("%g %s", x, f.unit)) }
			d = append(d, fmt.Sprintf("%s: %s then, %s now", f.name, v(f.then), v(f.now)))
		}
	}
	return d
}

// String writes the headline figures for a person.
func (h Headline) String() string {
	if h.CoveredMonitoredPct == nil {
		return fmt.Sprintf("coverage not measurable (no part of the target monitored; %.1f %% of the whole target covered), %d holes, %.2f mL lethal outside the margin",
			h.CoveredTargetPct, h.Holes, h.OutsideMarginML)
	}
	return fmt.Sprintf("%.1f %% of the monitored target covered (%.1f %% of the whole target), %d holes, %.2f mL lethal outside the margin",
		*h.CoveredMonitoredPct, h.CoveredTargetPct, h.Holes, h.OutsideMarginML)
}

// pctText is a headline percentage for a person: "not measurable" for nil.
func pctText(p *float64) string {
	if p == nil {
		return "not measurable"
	}
	return fmt.Sprintf("%g %%", *p)
}

// withDefaults returns the SettingsJSON of a sign-off with the settings it
// does not name (added to the program after it was made) at their
// defaults, which is what the program did before they existed; settings
// that cannot be read are returned as they are.
func withDefaults(js json.RawMessage) json.RawMessage {
	s := DefaultSettings()
	if json.Unmarshal(js, &s) != nil {
		return js
	}
	out, err := SettingsJSON(s)
	if err != nil {
		return js
	}
	return out
}

// SignOffState is what a report or window says about the sign-offs of a
// case for the analysis shown.
type SignOffState struct {
	// Valid is the latest sign-off made on this very analysis; nil when
	// none was.
	Valid *SignOff
	// Last is the latest sign-off of the case whatever it was made on; nil
	// when the case was never signed off.
	Last *SignOff
	// Differences lists what differs between Last and the analysis shown
	// (empty when Valid is Last).
	Differences []string
}

// SignOffFor returns the sign-off state of the analysis r of study study
// read from the inputs with hash inputHash among the sign-offs of a case
// (in any order).
func SignOffFor(all []SignOff, inputHash, study string, r *Result) SignOffState {
	var st SignOffState
	for n := range all {
		s := &all[n]
		if st.Last == nil || s.Time.After(st.Last.Time) {
			st.Last = s
		}
		if r != nil && len(s.Differences(inputHash, study, r)) == 0 && (st.Valid == nil || s.Time.After(st.Valid.Time)) {
			st.Valid = s
		}
	}
	if st.Last != nil && st.Last != st.Valid && r != nil {
		st.Differences = st.Last.Differences(inputHash, study, r)
	}
	return st
}

// Line returns the state in one line for a person: who signed off, when,
// with which outcome; or "not signed off for these settings" with the last
// sign-off and what differs; or "not signed off". With anonymous the
// reviewer is not named.
func (st SignOffState) Line(anonymous bool) string {
	who := func(s *SignOff) string {
		if anonymous {
			return "a reviewer"
		}
		return s.Reviewer
	}
	switch {
	case st.Valid != nil:
		return fmt.Sprintf("signed off by %s on %s: %s", who(st.Valid), st.Valid.Time.UTC().Format("2006-01-02 15:04 UTC"), st.Valid.Outcome)
	case st.Last != nil:
		return fmt.Sprintf("not signed off for these settings (last sign-off by %s on %s; differs: %s)",
			who(st.Last), st.Last.Time.UTC().Format("2006-01-02 15:04 UTC"), strings.Join(st.Differences, "; "))
	}
	return "not signed off"
}

// settingsNames are the words for people of the settings' JSON keys.
var settingsNames = map[string]string{
	"threshold": "lethal threshold", "margin_mm": "margin (mm)", "model": "dose model",
	"excluded_sonications": "sonications left out", "trials": "Monte Carlo trials",
	"seed": "Monte Carlo seed", "cem43": "CEM43 model", "arrhenius": "Arrhenius model",
	"thermometry":     "thermometry",
	"alpha_ppm_per_c": "PRF α (ppm/°C)", "b0_t": "B0 (T)", "te_ms": "TE (ms)",
	"baseline_frames": "baseline frames", "body_temp_c": "body temperature (°C)",
	"phase_scale_rad": "phase scale (rad)", "phase_sign": "phase sign",
	"drift": "drift correction", "drift_order": "drift order", "drift_reference": "drift reference",
	"min_magnitude": "lowest magnitude", "max_motion": "motion limit",
	"carry_over": "residual heat added", "residual_warn_c": "residual heat warning (°C)",
	"drift_flag_c": "drift flag (°C)", "focal_length_mm": "focal length (mm)",
	"negligible_fraction": "negligible dose fraction",
}

// humanKey turns a JSON key into words: known names, else the key with
// its underscores as spaces.
func humanKey(k string) string {
	if n, ok := settingsNames[k]; ok {
		return n
	}
	return strings.ReplaceAll(k, "_", " ")
}

// settingsDiff lists the settings that differ between two SettingsJSON
// values, as "name: A then, B now". Sonications left out are compared
// apart.
func settingsDiff(then, now json.RawMessage) []string {
	return diffSettingsJSON(then, now, "then", "now")
}

// diffSettingsJSON lists the settings that differ between two
// SettingsJSON values a and b, as "name: A wa, B wb", sonications left
// out apart.
func diffSettingsJSON(then, now json.RawMessage, wa, wb string) []string {
	var a, b any
	if json.Unmarshal(then, &a) != nil || json.Unmarshal(now, &b) != nil {
		if !bytes.Equal(then, now) {
			return []string{"settings: not comparable with those of the sign-off"}
		}
		return nil
	}
	var out []string
	var walk func(path []string, x, y any)
	walk = func(path []string, x, y any) {
		mx, okx := x.(map[string]any)
		my, oky := y.(map[string]any)
		if okx && oky {
			keys := map[string]bool{}
			for k := range mx {
				keys[k] = true
			}
			for k := range my {
				keys[k] = true
			}
			ks := make([]string, 0, len(keys))
			for k := range keys {
				if len(path) == 0 && k == "excluded_sonications" {
					continue
				}
				ks = append(ks, k)
			}
			sort.Strings(ks)
			for _, k := range ks {
				walk(append(append([]string{}, path...), humanKey(k)), mx[k], my[k])
			}
			return
		}
		if reflect.DeepEqual(x, y) {
			return
		}
		out = append(out, fmt.Sprintf("%s: %s %s, %s %s", strings.Join(path, " "), valueText(x), wa, valueText(y), wb))
	}
	walk(nil, a, b)
	return out
}

// valueText writes a JSON value briefly.
func valueText(v any) string {
	switch x := v.(type) {
	case nil:
		return "none"
	case string:
		return x
	case float64:
		return fmt.Sprintf("%g", x)
	}
	b, _ := json.Marshal(v)
	if len(b) > 40 {
		return string(b[:37]) + "..."
	}
	return string(b)
}

func short(h string) string {
	if len(h) > 12 {
		return h[:12] + "…"
	}
	if h == "" {
		return "unknown"
	}
	return h
}

func orUnknown(s string) string {
	if s == "" {
		return "unknown"
	}
	return s
}

func intList(v []int) string {
	if len(v) == 0 {
		return "none"
	}
	s := make([]string, len(v))
	for n, x := range v {
		s[n] = fmt.Sprint(x)
	}
	return strings.Join(s, ", ")
}

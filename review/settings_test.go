package review

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"math"
	"reflect"
	"strings"
	"testing"

	"dosecover/dosemap"
)

func TestSettingsValidate(t *testing.T) {
	if err := DefaultSettings().Validate(); err != nil {
		t.Fatalf("defaults refused: %v", err)
	}
	for _, c := range []struct {
		name   string
		change func(*Settings)
		want   string // the JSON key the message names
	}{
		{"zero threshold", func(s *Settings) { s.Threshold = 0 }, "threshold"},
		{"NaN threshold", func(s *Settings) { s.Threshold = math.NaN() }, "threshold"},
		{"negative margin", func(s *Settings) { s.MarginMM = -1 }, "margin_mm"},
		{"margin too large", func(s *Settings) { s.MarginMM = LargestMarginMM + 1 }, "margin_mm"},
		{"unknown model", func(s *Settings) { s.Model = "linear" }, "model"},
		{"too many trials", func(s *Settings) { s.Trials = MaxTrials + 1 }, "trials"},
		{"sonication 0 excluded", func(s *Settings) { s.Excluded = []int{0} }, "excluded_sonications"},
		{"sonication excluded twice", func(s *Settings) { s.Excluded = []int{2, 2} }, "excluded_sonications"},
		{"break outside", func(s *Settings) { s.CEM43.Break = 60 }, "cem43.break_c"},
		{"R below zero", func(s *Settings) { s.CEM43.RBelow = 0 }, "cem43.r_below"},
		{"Arrhenius without A", func(s *Settings) { s.Arrhenius.A = 0 }, "arrhenius.a_per_s"},
		{"Arrhenius without Ea", func(s *Settings) { s.Arrhenius.Ea = math.Inf(1) }, "arrhenius.ea_j_per_mol"},
		{"rule", func(s *Settings) { s.CEM43.Rule = 7 }, "cem43.rule"},
		{"positive alpha", func(s *Settings) { s.Thermometry.AlphaPPMPerC = 0.01 }, "thermometry.alpha_ppm_per_c"},
		{"phase sign", func(s *Settings) { s.Thermometry.PhaseSign = 0 }, "thermometry.phase_sign"},
		{"B0 above clinical", func(s *Settings) { s.Thermometry.B0T = 30 }, "thermometry.b0_t"},
		{"negative TE", func(s *Settings) { s.Thermometry.TEms = -1 }, "thermometry.te_ms"},
		{"negative phase scale", func(s *Settings) { s.Thermometry.PhaseScale = -1 }, "thermometry.phase_scale_rad"},
		{"no baseline", func(s *Settings) { s.Thermometry.BaselineFrames = 0 }, "thermometry.baseline_frames"},
		{"body temperature", func(s *Settings) { s.Thermometry.BodyTempC = 60 }, "thermometry.body_temp_c"},
		{"drift", func(s *Settings) { s.Thermometry.Drift = 9 }, "thermometry.drift"},
		{"drift order", func(s *Settings) { s.Thermometry.DriftOrder = 3 }, "thermometry.drift_order"},
		{"magnitude", func(s *Settings) { s.Thermometry.MinMagnitude = 1 }, "thermometry.min_magnitude"},
		{"motion", func(s *Settings) { s.Thermometry.MaxMotion = -0.1 }, "thermometry.max_motion"},
		{"reference", func(s *Settings) { s.Thermometry.DriftReference = &Rect{W: 1, H: 1} }, "thermometry.drift_reference"},
		{"residual warning", func(s *Settings) { s.ResidualWarnC = -1 }, "residual_warn_c"},
	} {
		s := DefaultSettings()
		c.change(&s)
		err := s.Validate()
		if err == nil || !strings.HasPrefix(err.Error(), c.want) {
			t.Errorf("%s: %v, want an error naming %q", c.name, err, c.want)
		}
	}
}

// leaves lists the paths of every settable leaf field of v (a struct),
// following structs and pointers to structs, with a function that changes
// that field to another valid-looking value.
func leaves(t *testing.T, v reflect.Value, path string, out map[string]func()) {
	switch v.Kind() {
	case reflect.Struct:
		for i := range v.NumField() {
			f := v.Type().Field(i)
			if !f.IsExported() {
				continue
			}
			leaves(t, v.Field(i), path+"."+f.Name, out)
		}
	case reflect.Pointer:
		if v.IsNil() {
			v.Set(reflect.New(v.Type().Elem()))
		}
		leaves(t, v.Elem(), path, out)
	case reflect.Float64:
		out[path] = func() { v.SetFloat(v.Float()*2 + 1) }
	case reflect.Int:
		if v.Type().PkgPath() != "" { // a named method (drift, time rule): another valid one
			out[path] = func() { v.SetInt(1 - min(v.Int(), 1)) }
			break
		}
		out[path] = func() { v.SetInt(v.Int() + 1) }
	case reflect.Uint64:
		out[path] = func() { v.SetUint(v.Uint() + 1) }
	case reflect.Bool:
		out[path] = func() { v.SetBool(!v.Bool()) }
	case reflect.String:
		out[path] = func() { v.SetString(v.String() + "x") }
	case reflect.Slice:
		out[path] = func() { v.Set(reflect.Append(v, reflect.ValueOf(99))) }
	case reflect.Array:
		for i := range v.Len() {
			leaves(t, v.Index(i), path+"["+string(rune('0'+i))+"]", out)
		}
	default:
		t.Fatalf("%s: field of kind %s not covered by this test", path, v.Kind())
	}
}

// TestSettingsHashCoversEveryField walks every field of Settings by
// reflection (so a field added later is covered without touching this
// test), changes it alone, and checks that the hash changes. The hash is
// recomputed here independently as SHA-256 (FIPS 180-4) of the settings'
// JSON, and the JSON is checked to name every field in snake_case.
func TestSettingsHashCoversEveryField(t *testing.T) {
	base := DefaultSettings()
	base.Thermometry.DriftReference = &Rect{U: dosemap.Vec3{1, 0, 0}, V: dosemap.Vec3{0, 1, 0}, W: 10, H: 10}
	h0 := base.Hash()
	js, err := json.Marshal(base)
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256(js)
	if hex.EncodeToString(sum[:]) != h0 {
		t.Errorf("hash %s is not the SHA-256 of the settings' JSON", h0)
	}
	var generic map[string]any
	if err := json.Unmarshal(js, &generic); err != nil {
		t.Fatal(err)
	}
	var keys func(m map[string]any, path string)
	keys = func(m map[string]any, path string) {
		for k, v := range m {
			if k != strings.ToLower(k) || strings.ContainsAny(k, " -") {
				t.Errorf("JSON key %s%s is not snake_case", path, k)
			}
			if sub, ok := v.(map[string]any); ok {
				keys(sub, path+k+".")
			}
		}
	}
	keys(generic, "")
	if _, ok := generic["thermometry"]; !ok {
		t.Error("the settings' JSON has no thermometry")
	}
	probe := map[string]func(){}
	s := base
	s.Thermometry.DriftReference = &Rect{}
	*s.Thermometry.DriftReference = *base.Thermometry.DriftReference
	leaves(t, reflect.ValueOf(&s).Elem(), "", probe)
	if len(probe) < 25 {
		t.Fatalf("only %d fields found", len(probe))
	}
	for path, change := range probe {
		saved := s
		savedRef := *s.Thermometry.DriftReference
		change()
		if s.Hash() == h0 {
			t.Errorf("changing %s leaves the hash unchanged", path)
		}
		s = saved
		*s.Thermometry.DriftReference = savedRef
		s.Excluded = nil
		if s.Hash() != h0 {
			t.Fatalf("restoring %s did not restore the hash", path)
		}
	}
}

// TestReadSettingsPartialFile: a file with some keys changes only those;
// unknown keys, a second value and bad enumerations are refused; a model
// change without a threshold takes the model's threshold (Ω = 1,
// Henriques & Moritz 1947).
func TestReadSettingsPartialFile(t *testing.T) {
	d := DefaultSettings()
	s, err := ReadSettings(strings.NewReader(`{"thermometry": {"drift": "none"}, "margin_mm": 4}`), "f.json", d)
	if err != nil {
		t.Fatal(err)
	}
	want := d
	want.Thermometry.Drift, want.MarginMM = dosemap.DriftNone, 4
	if !s.Equal(want) {
		t.Errorf("read %s\nwant %s", s.JSON(), want.JSON())
	}
	s, err = ReadSettings(strings.NewReader(`{"model": "arrhenius"}`), "f.json", d)
	if err != nil || s.Threshold != 1 || s.Model != ModelArrhenius {
		t.Errorf("model change: threshold %g, %v", s.Threshold, err)
	}
	round, err := ReadSettings(strings.NewReader(string(want.JSON())), "f.json", DefaultSettings())
	if err != nil || !round.Equal(want) {
		t.Errorf("round trip: %v\n%s\n%s", err, round.JSON(), want.JSON())
	}
	for _, bad := range []string{
		`{"thermometry": {"drift": "spline"}}`,
		`{"cem43": {"rule": "simpson"}}`,
		`{"thresh": 3}`,
		`{"threshold": 3} {}`,
		`{"thermometry": {"alpha_ppm_per_c": 0.01}}`,
		`[1, 2]`,
	} {
		if _, err := ReadSettings(strings.NewReader(bad), "bad.json", d); err == nil || !strings.Contains(err.Error(), "bad.json") {
			t.Errorf("%s: %v, want an error naming the file", bad, err)
		}
	}
}

// TestSettingsRedo: what each kind of change costs.
func TestSettingsRedo(t *testing.T) {
	d := DefaultSettings()
	for _, c := range []struct {
		name   string
		change func(*Settings)
		want   Redo
	}{
		{"nothing", func(s *Settings) {}, RedoNothing},
		{"exclusions in another order", func(s *Settings) { s.Excluded = nil }, RedoNothing},
		{"threshold", func(s *Settings) { s.Threshold = 300 }, RedoAnalysis},
		{"margin", func(s *Settings) { s.MarginMM = 5 }, RedoAnalysis},
		{"excluded", func(s *Settings) { s.Excluded = []int{3} }, RedoAnalysis},
		{"seed", func(s *Settings) { s.Seed = 9 }, RedoAnalysis},
		{"unused model's parameters", func(s *Settings) { s.Arrhenius.A = 1e50 }, RedoAnalysis},
		{"model", func(s *Settings) { s.Model = ModelArrhenius }, RedoThermometry},
		{"CEM43 R", func(s *Settings) { s.CEM43.RBelow = 0.3 }, RedoThermometry},
		{"rule", func(s *Settings) { s.CEM43.Rule = dosemap.RuleRectangle }, RedoThermometry},
		{"alpha", func(s *Settings) { s.Thermometry.AlphaPPMPerC = -0.0097 }, RedoThermometry},
		{"drift", func(s *Settings) { s.Thermometry.Drift = dosemap.DriftMean }, RedoThermometry},
		{"reference", func(s *Settings) { s.Thermometry.DriftReference = &Rect{W: 1, H: 1} }, RedoThermometry},
		{"phase scale", func(s *Settings) { s.Thermometry.PhaseScale = 0.001 }, RedoReading},
	} {
		s := d
		c.change(&s)
		if got := s.Redo(d); got != c.want {
			t.Errorf("%s: %d, want %d", c.name, got, c.want)
		}
	}
}

// TestThermometryOptions: the settings reach dosemap in its units (TE in
// s) and a drawn reference becomes the voxels inside it.
func TestThermometryOptions(t *testing.T) {
	g := thermoGrid(16, 16, 4) // voxel centres every 1.25 mm from -9.375 mm
	s := DefaultThermometrySettings()
	s.TEms, s.B0T = 12, 3
	s.DriftReference = NewRect(dosemap.Vec3{-10, -10, 0}, dosemap.Vec3{-7, -7, 0}, dosemap.Vec3{1, 0, 0}, dosemap.Vec3{0, 1, 0})
	o, err := s.Options(g)
	if err != nil {
		t.Fatal(err)
	}
	if o.PRF.B0 != 3 || math.Abs(o.PRF.TE-0.012) > 1e-15 {
		t.Errorf("B0 %g T, TE %g s; want 3 T, 0.012 s", o.PRF.B0, o.PRF.TE)
	}
	// Centres at -9.375, -8.125 in x and y inside [-10, -7]: 2 × 2 per slice, 4 slices.
	n := 0
	for _, in := range o.Reference {
		if in {
			n++
		}
	}
	if n != 16 {
		t.Errorf("reference holds %d voxels, want 16", n)
	}
	s.DriftReference = NewRect(dosemap.Vec3{100, 100, 0}, dosemap.Vec3{110, 110, 0}, dosemap.Vec3{1, 0, 0}, dosemap.Vec3{0, 1, 0})
	if _, err := s.Options(g); err == nil {
		t.Error("a reference outside the thermometry was accepted")
	}
}

// TestSettingsDifferences: the settings that differ are listed one each,
// named for people, with both values; left-out sonications and equal
// settings give nothing (the comparison is of the JSON every setting is
// written to, so a new field is covered without a change here).
func TestSettingsDifferences(t *testing.T) {
	base := DefaultSettings()
	for _, tc := range []struct {
		name   string
		change func(*Settings)
		want   []string
	}{
		{"same", func(*Settings) {}, nil},
		{"left out only", func(s *Settings) { s.Excluded = []int{3} }, nil},
		{"threshold", func(s *Settings) { s.Threshold = 300 }, []string{"lethal threshold: 300 here, 240 there"}},
		{"margin and alpha", func(s *Settings) { s.MarginMM = 5; s.Thermometry.BodyTempC = 36 }, []string{"margin (mm): 5 here, 3 there", "thermometry body temperature (°C): 36 here, 37 there"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := base
			tc.change(&s)
			got := s.Differences(base, "here", "there")
			if strings.Join(got, "|") != strings.Join(tc.want, "|") {
				t.Errorf("differences %q, want %q", got, tc.want)
			}
		})
	}
}

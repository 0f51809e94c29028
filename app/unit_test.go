//go:build cgo

package main

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/review"

	"fyne.io/fyne/v2/test"
)

func TestSettingsPreferencesKeepDefaultsNotExclusions(t *testing.T) {
	a := test.NewTempApp(t)
	s := review.DefaultSettings()
	s.Threshold, s.MarginMM, s.Excluded = 100, 4, []int{2}
	s.Thermometry.Drift = dosemap.DriftNone
	savePrefSettings(a.Preferences(), s)
	got := loadPrefSettings(a.Preferences())
	if got.Threshold != 100 || got.MarginMM != 4 || got.Thermometry.Drift != dosemap.DriftNone || len(got.Excluded) != 0 {
		t.Errorf("saved settings not restored, or exclusions kept: %+v", got)
	}
	// Defaults saved by the earlier window layout still read.
	a.Preferences().SetString(prefSettings, "")
	a.Preferences().SetString(prefSettingsV1, `{"threshold":120,"margin_mm":5,"model":"cem43","cem43_break_c":43,"cem43_r_above":0.5,"cem43_r_below":0.25,"prf_alpha_ppm_per_c":-0.0098,"body_temp_c":37,"baseline_frames":3,"drift":"mean","drift_order":1,"trials":50}`)
	got = loadPrefSettings(a.Preferences())
	if got.Threshold != 120 || got.MarginMM != 5 || got.Thermometry.AlphaPPMPerC != -0.0098 || got.Thermometry.BaselineFrames != 3 || got.Thermometry.Drift != dosemap.DriftMean {
		t.Errorf("earlier layout read as %+v", got)
	}
	if len(got.Excluded) != 0 {
		t.Errorf("exclusions belong to one case but were kept as defaults: %v", got.Excluded)
	}
	a.Preferences().SetString(prefSettings, `{"threshold": -5}`)
	if got := loadPrefSettings(a.Preferences()); got.Threshold != review.DefaultSettings().Threshold {
		t.Errorf("invalid saved settings were used: %+v", got)
	}
}

func TestHashInputs(t *testing.T) {
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "a.dcm"), []byte("abc"), 0o644); err != nil {
		t.Fatal(err)
	}
	h1, n, err := hashInputs(context.Background(), dir)
	if err != nil || n != 1 {
		t.Fatalf("hashInputs: %v, %d files", err, n)
	}
	// One file "abc": the outer hash is over "a.dcm", a zero byte, the size
	// 3 as 8 bytes big-endian and "abc", as documented on hashInputs.
	outer := sha256.Sum256([]byte("a.dcm\x00\x00\x00\x00\x00\x00\x00\x00\x03abc"))
	if want := hex.EncodeToString(outer[:]); h1 != want {
		t.Errorf("hash %s, want %s", h1, want)
	}
	// FIPS 180-2, Appendix B.1: SHA-256("abc"), to check the library call
	// the composition rests on.
	if abc := sha256.Sum256([]byte("abc")); hex.EncodeToString(abc[:]) != "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad" {
		t.Error("SHA-256 of abc differs from FIPS 180-2 B.1")
	}
	// The same content in another folder gives the same hash; a changed
	// byte or a new file changes it.
	dir2 := t.TempDir()
	os.WriteFile(filepath.Join(dir2, "a.dcm"), []byte("abc"), 0o644)
	if h, _, _ := hashInputs(context.Background(), dir2); h != h1 {
		t.Errorf("copy of the folder hashes differently: %s vs %s", h, h1)
	}
	os.WriteFile(filepath.Join(dir2, "a.dcm"), []byte("abd"), 0o644)
	if h, _, _ := hashInputs(context.Background(), dir2); h == h1 {
		t.Error("changed file content left the hash unchanged")
	}
	os.MkdirAll(filepath.Join(dir, "sub"), 0o755)
	os.WriteFile(filepath.Join(dir, "sub", "b.dcm"), []byte{}, 0o644)
	if h, n, _ := hashInputs(context.Background(), dir); h == h1 || n != 2 {
		t.Errorf("added file: hash unchanged or %d files", n)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, _, err := hashInputs(ctx, dir); err == nil {
		t.Error("cancelled hashing did not fail")
	}
}

func TestReviewRecordRoundTripOutsideInput(t *testing.T) {
	store := t.TempDir()
	reviewsDir = func() (string, error) { return store, nil }
	input := t.TempDir()
	os.WriteFile(filepath.Join(input, "x.dcm"), []byte("data"), 0o644)
	hash, n, err := hashInputs(context.Background(), input)
	if err != nil {
		t.Fatal(err)
	}
	if r, err := loadRecord(hash); r != nil || err != nil {
		t.Fatalf("record before any save: %v, %v", r, err)
	}
	rec := &reviewRecord{InputHash: hash, Files: n, Settings: review.DefaultSettings()}
	at := time.Date(2026, 3, 4, 5, 6, 7, 0, time.UTC)
	rec.SignOffs = append(rec.SignOffs, review.SignOff{Reviewer: "Dr. Example", Outcome: review.OutcomeAccepted, Comment: "ok", Time: at, InputHash: hash})
	if err := rec.save(); err != nil {
		t.Fatal(err)
	}
	got, err := loadRecord(hash)
	if err != nil || got == nil {
		t.Fatalf("loadRecord: %v", err)
	}
	if len(got.SignOffs) != 1 || got.SignOffs[0].Reviewer != "Dr. Example" || !got.SignOffs[0].Time.Equal(at) {
		t.Errorf("sign-off not kept: %+v", got.SignOffs)
	}
	ents, _ := os.ReadDir(input)
	if len(ents) != 1 {
		t.Errorf("the input folder was written to: %d entries", len(ents))
	}
	if h, _, _ := hashInputs(context.Background(), input); h != hash {
		t.Error("input hash changed after saving the record")
	}
}

func TestOrientationLetters(t *testing.T) {
	// DICOM PS3.3 C.7.6.1.1.1: +x is the patient's left (L), +y posterior
	// (P), +z head (shown as S, superior, common practice).
	for _, c := range []struct {
		d    dosemap.Vec3
		want string
	}{
		{dosemap.Vec3{1, 0, 0}, "L"}, {dosemap.Vec3{-1, 0, 0}, "R"},
		{dosemap.Vec3{0, 1, 0}, "P"}, {dosemap.Vec3{0, -1, 0}, "A"},
		{dosemap.Vec3{0, 0, 1}, "S"}, {dosemap.Vec3{0, 0, -1}, "I"},
		{dosemap.Vec3{0.8, 0.6, 0}, "L"}, {dosemap.Vec3{0.2, -0.3, 0.9}, "S"},
	} {
		if got := orientationLetter(c.d); got != c.want {
			t.Errorf("orientationLetter(%v) = %s, want %s", c.d, got, c.want)
		}
	}
}

func TestViewTransformRoundTrip(t *testing.T) {
	g := dosemap.NewAxialGeometry(64, 48, 10, dosemap.Vec3{0.8, 0.8, 2.5}, dosemap.Vec3{-25, -19, -11})
	for _, k := range []planeKind{planeAcquisition, planeReformatRow, planeReformatCol} {
		u, v, n, _, _, _, _ := planeAxes(g, k)
		if math.Abs(u.Dot(v)) > 1e-12 || math.Abs(u.Dot(n)) > 1e-12 || math.Abs(v.Dot(n)) > 1e-12 {
			t.Errorf("%v: axes not orthogonal", k)
		}
		tr := viewTransform{Centre: gridCentre(g), U: u, V: v, MMPerPixel: 0.37, W: 300, H: 200}
		for _, px := range [][2]float64{{0, 0}, {150, 100}, {299.5, 12.25}} {
			x, y := tr.Pixel(tr.At(px[0], px[1]))
			if math.Abs(x-px[0]) > 1e-9 || math.Abs(y-px[1]) > 1e-9 {
				t.Errorf("%v: pixel %v -> %v, %v", k, px, x, y)
			}
		}
	}
	// Axial acquisition plane: image right is patient left, image down is
	// posterior (the radiological presentation, common practice).
	u, v, _, _, _, _, _ := planeAxes(g, planeAcquisition)
	if orientationLetter(u) != "L" || orientationLetter(v) != "P" {
		t.Errorf("axial plane shows %s right and %s down", orientationLetter(u), orientationLetter(v))
	}
	// Reformats of an axial stack put the patient's head at the top.
	for _, k := range []planeKind{planeReformatRow, planeReformatCol} {
		_, v, _, _, _, _, _ := planeAxes(g, k)
		if orientationLetter(v.Scale(-1)) != "S" {
			t.Errorf("%v: top of the image is %s, want S", k, orientationLetter(v.Scale(-1)))
		}
	}
}

func TestMissingScannerValuesAsked(t *testing.T) {
	rw := &reviewWindow{loaded: &loadedCase{MissingB0: true, MissingTE: true}, settings: review.DefaultSettings()}
	note := rw.missingScannerValues()
	for _, want := range []string{"B0", "MagneticFieldStrength", "TE", "EchoTime"} {
		if !strings.Contains(note, want) {
			t.Errorf("request %q lacks %q", note, want)
		}
	}
	rw.settings.Thermometry.B0T = 3
	if note := rw.missingScannerValues(); strings.Contains(note, "B0") || !strings.Contains(note, "TE") {
		t.Errorf("with B0 given the request is %q", note)
	}
	rw.settings.Thermometry.TEms = 12
	if note := rw.missingScannerValues(); note != "" {
		t.Errorf("with B0 and TE given the window still asks: %q", note)
	}
	// The settings reach the thermometry in SI units.
	o, err := rw.settings.Thermometry.Options(dosemap.NewAxialGeometry(2, 2, 1, dosemap.Vec3{1, 1, 1}, dosemap.Vec3{}))
	if err != nil {
		t.Fatal(err)
	}
	if o.PRF.B0 != 3 || math.Abs(o.PRF.TE-0.012) > 1e-15 {
		t.Errorf("thermometry B0 %g T, TE %g s; want 3 T, 0.012 s", o.PRF.B0, o.PRF.TE)
	}
}

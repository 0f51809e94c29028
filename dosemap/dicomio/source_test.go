package dicomio

import (
	"context"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/testkit"
)

// sameFrames reports the first difference between two frame lists
// (NaN equal to NaN), or "".
func sameFrames(what string, a, b [][]float32) string {
	if len(a) != len(b) {
		return what + ": frame counts differ"
	}
	for f := range a {
		if len(a[f]) != len(b[f]) {
			return what + ": frame lengths differ"
		}
		for n := range a[f] {
			x, y := a[f][n], b[f][n]
			if x != y && !(x != x && y != y) {
				return what + ": values differ"
			}
		}
	}
	return ""
}

// TestDeferredMatchesResident loads the synthetic case (phase and
// magnitude in one series, signed 12-bit phase with a separate magnitude
// series, one phase file removed so a slice is missing, an enhanced
// multi-frame series) with and without LoadOptions.Deferred: the frames a
// Source decodes must equal, value for value, those Load decodes (which
// TestLoadSyntheticCase checks against the generating formulas), on every
// read, also after buffers were handed back and reused by another
// sonication.
func TestDeferredMatchesResident(t *testing.T) {
	dir := writeTestCase(t)
	writeEnhanced(t, filepath.Join(dir, "enhanced"), 3, 4)
	// Remove one frame of "thermo B phase" (series number 5): its slice is
	// NaN in both loads.
	files, _ := filepath.Glob(filepath.Join(dir, "*", "*"))
	removed := ""
	for _, f := range files {
		fi, err := readFile(f, false)
		if err == nil && fi.SeriesUID == "2.25.105" {
			removed = f
			break
		}
	}
	if removed == "" {
		t.Fatal("no file of series 2.25.105 found")
	}
	if err := os.Remove(removed); err != nil {
		t.Fatal(err)
	}
	res, rinv, err := Load(t.Context(), dir, LoadOptions{Workers: 2}, nil)
	if err != nil {
		t.Fatal(err)
	}
	def, dinv, err := Load(t.Context(), dir, LoadOptions{Workers: 2, Deferred: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Sonications) != 3 || len(def.Sonications) != 3 {
		t.Fatalf("%d and %d sonications, want 3", len(res.Sonications), len(def.Sonications))
	}
	if rinv.Reviewable != dinv.Reviewable || len(rinv.Problems) != len(dinv.Problems) {
		t.Errorf("inventories differ: %q / %q", rinv.Problems, dinv.Problems)
	}
	missing := 0
	for n, r := range res.Sonications {
		d := def.Sonications[n]
		if d.Phase != nil || d.Magnitude != nil || d.Source == nil {
			t.Fatalf("sonication %d: deferred load holds frames (%v) or no source", d.Number, d.Phase != nil)
		}
		if !d.HasPhase() || d.Frames() != r.Frames() || d.Geometry != r.Geometry {
			t.Errorf("sonication %d: %d frames on %v, resident %d on %v", d.Number, d.Frames(), d.Geometry, r.Frames(), r.Geometry)
		}
		for _, f := range r.Phase {
			for _, v := range f {
				if v != v {
					missing++
				}
			}
		}
		for pass := 0; pass < 2; pass++ {
			ph, mag, notes, err := d.Source.ReadFrames(t.Context())
			if err != nil || len(notes) > 0 {
				t.Fatalf("sonication %d: %v %q", d.Number, err, notes)
			}
			if msg := sameFrames("phase", ph, r.Phase); msg != "" {
				t.Errorf("sonication %d, read %d: %s", d.Number, pass+1, msg)
			}
			if msg := sameFrames("magnitude", mag, r.Magnitude); msg != "" {
				t.Errorf("sonication %d, read %d: %s", d.Number, pass+1, msg)
			}
			// Scribble over the buffers before handing them back: the next
			// read must overwrite every value.
			for _, f := range append(ph, mag...) {
				for i := range f {
					f[i] = 12345
				}
			}
			d.Source.ReleaseFrames(ph, mag)
		}
	}
	// The removed file leaves one slice of 8×8 NaN in one frame.
	if missing != 64 {
		t.Errorf("%d NaN phase values, want 64 (one missing 8×8 slice)", missing)
	}
	// Thermometry straight from a deferred sonication equals that of the
	// resident one.
	opt := dosemap.DefaultThermometryOptions()
	for n, r := range res.Sonications {
		a, err1 := dosemap.Thermometry(r, opt)
		b, err2 := dosemap.Thermometry(def.Sonications[n], opt)
		if err1 != nil || err2 != nil {
			if (err1 == nil) != (err2 == nil) {
				t.Errorf("sonication %d: errors %v / %v", r.Number, err1, err2)
			}
			continue
		}
		if msg := sameFrames("temperature", a.Frames, b.Frames); msg != "" {
			t.Errorf("sonication %d: %s", r.Number, msg)
		}
	}
}

// deferredCase writes the synthetic case, loads it with Deferred and
// returns the folder, the case and the frame source of sonication index n.
func deferredCase(t *testing.T, n int) (string, *dosemap.Case, *frameSource) {
	t.Helper()
	dir := writeTestCase(t)
	c, _, err := Load(t.Context(), dir, LoadOptions{Deferred: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	return dir, c, c.Sonications[n].Source.(*frameSource)
}

// TestDeferredFileChanged changes a phase file after the attributes were
// read: its frames come back NaN, with a note naming the file, and the
// other frames are still read.
func TestDeferredFileChanged(t *testing.T) {
	dir, c, src := deferredCase(t, 0)
	victim := src.files[0]
	f, err := os.OpenFile(victim.Path, os.O_APPEND|os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	f.Write([]byte{0, 0})
	f.Close()
	ph, mag, notes, err := src.ReadFrames(t.Context())
	if err != nil {
		t.Fatal(err)
	}
	defer src.ReleaseFrames(ph, mag)
	rel, _ := filepath.Rel(dir, victim.Path)
	if len(notes) != 1 || !strings.Contains(notes[0], rel) || !strings.Contains(notes[0], "changed") {
		t.Fatalf("notes %q, want one naming %s as changed", notes, rel)
	}
	nan, finite := 0, 0
	for _, fr := range append(ph, mag...) {
		for _, v := range fr {
			if math.IsNaN(float64(v)) {
				nan++
			} else {
				finite++
			}
		}
	}
	want := len(src.plan[0]) * src.sl // one slice per frame of the file
	if nan != want || finite == 0 {
		t.Errorf("%d NaN values (want %d, the frames of the changed file), %d read", nan, want, finite)
	}
	// Through Resident the note reaches the caller.
	_, rnotes, done, err := c.Sonications[0].Resident(t.Context())
	if err != nil || len(rnotes) != 1 {
		t.Errorf("Resident: %v, notes %q", err, rnotes)
	}
	done()
}

// TestDeferredFileRemoved: a file removed after the attributes were read
// is named with a plain reason; its frames are NaN.
func TestDeferredFileRemoved(t *testing.T) {
	dir, _, src := deferredCase(t, 1)
	victim := src.files[len(src.files)-1]
	if err := os.Remove(victim.Path); err != nil {
		t.Fatal(err)
	}
	ph, mag, notes, err := src.ReadFrames(t.Context())
	if err != nil {
		t.Fatal(err)
	}
	defer src.ReleaseFrames(ph, mag)
	rel, _ := filepath.Rel(dir, victim.Path)
	want := rel + ": pixel data could not be read (does not exist); its frames are marked not monitored"
	if len(notes) != 1 || notes[0] != want {
		t.Errorf("notes %q, want [%q]", notes, want)
	}
}

// TestDeferredFileRewritten: a file rewritten with other bytes of the same
// size after the attributes were read is refused by its modification
// time.
func TestDeferredFileRewritten(t *testing.T) {
	_, _, src := deferredCase(t, 0)
	victim := src.files[0]
	data, err := os.ReadFile(victim.Path)
	if err != nil {
		t.Fatal(err)
	}
	data[len(data)-1] ^= 0xFF
	if err := os.WriteFile(victim.Path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	later := victim.ModTime.Add(2 * time.Second)
	if err := os.Chtimes(victim.Path, later, later); err != nil {
		t.Fatal(err)
	}
	ph, mag, notes, err := src.ReadFrames(t.Context())
	if err != nil {
		t.Fatal(err)
	}
	defer src.ReleaseFrames(ph, mag)
	if len(notes) != 1 || !strings.Contains(notes[0], "changed while it was being read (modified") {
		t.Errorf("notes %q, want one naming the modification", notes)
	}
}

// TestDeferredCancelled: reading the frames stops when the context ends.
func TestDeferredCancelled(t *testing.T) {
	dir := writeTestCase(t)
	c, _, err := Load(t.Context(), dir, LoadOptions{Deferred: true}, nil)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(t.Context())
	cancel()
	if _, _, _, err := c.Sonications[0].Source.ReadFrames(ctx); !errors.Is(err, context.Canceled) {
		t.Errorf("err %v, want context.Canceled", err)
	}
	if _, _, _, err := c.Sonications[0].Resident(ctx); !errors.Is(err, context.Canceled) {
		t.Errorf("Resident: err %v, want context.Canceled", err)
	}
}

// TestReadFileReusesNoBytes reads the pydicom test files one after the
// other through the reused read buffer and checks that the attributes of
// each are unchanged after later files were read into the same buffer.
func TestReadFileReusesNoBytes(t *testing.T) {
	dir := testkit.PydicomTestFiles(t)
	files, _ := filepath.Glob(filepath.Join(dir, "*.dcm"))
	if len(files) == 0 {
		t.Skip("no pydicom test files")
	}
	type seen struct {
		fi   *fileInfo
		desc string
		uid  string
		typ  string
	}
	var got []seen
	for _, f := range files {
		fi, err := readFile(f, false)
		if err != nil {
			continue
		}
		got = append(got, seen{fi, fi.SeriesDescription, fi.SOPInstance, strings.Join(fi.ImageType, `\`)})
	}
	if len(got) < 10 {
		t.Fatalf("only %d pydicom files read", len(got))
	}
	for _, s := range got {
		again, err := readFile(s.fi.Path, false)
		if err != nil {
			t.Fatalf("%s: %v", s.fi.Path, err)
		}
		if s.fi.SeriesDescription != s.desc || s.fi.SOPInstance != s.uid || strings.Join(s.fi.ImageType, `\`) != s.typ {
			t.Errorf("%s: attributes changed after other files were read", filepath.Base(s.fi.Path))
		}
		if again.SOPInstance != s.uid || again.SeriesDescription != s.desc {
			t.Errorf("%s: a second read differs", filepath.Base(s.fi.Path))
		}
	}
}

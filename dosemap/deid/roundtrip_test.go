package deid

import (
	"bytes"
	"context"
	"io/fs"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
)

// Invented identifying values given to a copy of a simulated session.
var simIdentity = map[tag.Tag]string{
	tag.PatientName: "TESTPERSON^INVENTED", tag.PatientID: "INV-7731-QQ", tag.PatientBirthDate: "19580417",
	tag.InstitutionName: "Nowhere Test Clinic", tag.ReferringPhysicianName: "DRFICTIONAL^B", tag.OperatorsName: "OPFAKENAME",
}

// withIdentity copies the case in src to dst, setting the invented values
// in every DICOM file; other files are copied as they are.
func withIdentity(t *testing.T, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, e fs.DirEntry, err error) error {
		if err != nil || e.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		out := filepath.Join(dst, rel)
		if err := os.MkdirAll(filepath.Dir(out), 0o755); err != nil {
			return err
		}
		ds, err := dicom.ParseFile(p, nil, dicom.SkipProcessingPixelDataValue())
		if err != nil {
			b, err := os.ReadFile(p)
			if err != nil {
				return err
			}
			return os.WriteFile(out, b, 0o644)
		}
		var add []*dicom.Element
		for tg, v := range simIdentity {
			e, err := dicom.NewElement(tg, []string{v})
			if err != nil {
				return err
			}
			add = append(add, e)
		}
		ds.Elements = upsert(ds.Elements, add)
		var buf bytes.Buffer
		if err := dicom.Write(&buf, ds, dicom.SkipVRVerification(), dicom.SkipValueTypeVerification()); err != nil {
			return err
		}
		return os.WriteFile(out, buf.Bytes(), 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
}

// TestSimulatedSessionRoundTrip de-identifies a two-sonication cut of the
// demo session carrying invented identity and reads both folders back with
// dicomio: no output byte holds an identifying value, and everything the
// analysis uses (anatomy, thermometry frames and their timing, field
// strength and echo time, geometry, structures) is identical, so every
// metric computed from the copy equals the original's.
func TestSimulatedSessionRoundTrip(t *testing.T) {
	if testing.Short() {
		t.Skip("writes and reads two simulated sessions")
	}
	root := t.TempDir()
	s := sim.DemoSession()
	s.Sonications = s.Sonications[:2]
	s.Motion = nil
	plain := filepath.Join(root, "plain")
	if _, err := sim.WriteSession(plain, s); err != nil {
		t.Fatal(err)
	}
	ident := filepath.Join(root, "TESTPERSON case")
	withIdentity(t, plain, ident)
	dst := filepath.Join(root, "teaching")
	const shift = -400
	res, err := Folder(context.Background(), ident, dst, Options{Salt: "round trip", ShiftDays: shift}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Files) == 0 {
		t.Fatal("no file written")
	}
	// No byte of any output file (nor its name) holds an identifying value.
	ents, _ := os.ReadDir(dst)
	for _, e := range ents {
		b, _ := os.ReadFile(filepath.Join(dst, e.Name()))
		for _, v := range append([]string{"TESTPERSON", "INVENTED", "Nowhere Test Clinic", "19580417", "INV-7731-QQ", "DRFICTIONAL", "OPFAKENAME"}, "TESTPERSON case") {
			if bytes.Contains(b, []byte(v)) || bytes.Contains(b, []byte(strings.ToUpper(v))) || strings.Contains(e.Name(), v) {
				t.Errorf("%s holds %q", e.Name(), v)
			}
		}
	}
	// dciodvfy (Debian dicom3tools) finds no error in the copies of the
	// first anatomy image and of the structure set (the last file) that it
	// did not find in the originals.
	needDciodvfy(t)
	for _, f := range []FileResult{res.Files[0], res.Files[len(res.Files)-1]} {
		before := errorsOf(f.Src)
		for l := range errorsOf(f.Dst) {
			if !before[l] {
				t.Errorf("%s: new dciodvfy finding: %s", filepath.Base(f.Dst), l)
			}
		}
	}
	ctx := context.Background()
	a, ainv, err := dicomio.Load(ctx, ident, dicomio.LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, binv, err := dicomio.Load(ctx, dst, dicomio.LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !ainv.Reviewable || !binv.Reviewable {
		t.Fatalf("reviewable: original %v (%s), copy %v (%s)", ainv.Reviewable, ainv.NotReviewable, binv.Reviewable, binv.NotReviewable)
	}
	if a.Patient.Name == "" || strings.Contains(b.Patient.Name, "TESTPERSON") || b.Patient.BirthDate != "" || b.Patient.Institution != "" {
		t.Errorf("patient before %+v, after %+v", a.Patient, b.Patient)
	}
	if !reflect.DeepEqual(a.Anatomy, b.Anatomy) || a.WindowCenter != b.WindowCenter || a.WindowWidth != b.WindowWidth {
		t.Error("anatomy differs")
	}
	if len(a.Sonications) != len(b.Sonications) || len(a.Sonications) != 2 {
		t.Fatalf("sonications: %d original, %d copy, want 2", len(a.Sonications), len(b.Sonications))
	}
	for n := range a.Sonications {
		x, y := a.Sonications[n], b.Sonications[n]
		if x.Number != y.Number || x.Geometry != y.Geometry || x.B0 != y.B0 || x.TE != y.TE ||
			!reflect.DeepEqual(x.Times, y.Times) || !reflect.DeepEqual(x.Phase, y.Phase) ||
			!reflect.DeepEqual(x.Magnitude, y.Magnitude) || !reflect.DeepEqual(x.Temperature, y.Temperature) ||
			!reflect.DeepEqual(x.Dose, y.Dose) {
			t.Errorf("sonication %d differs after de-identification", x.Number)
		}
		if x.SeriesUID == y.SeriesUID || x.FrameOfRef == y.FrameOfRef {
			t.Errorf("sonication %d: UIDs not replaced", x.Number)
		}
		if y.FrameOfRef != b.FrameOfRef {
			t.Errorf("sonication %d: frame of reference %s no longer matches the anatomy's %s", x.Number, y.FrameOfRef, b.FrameOfRef)
		}
		// Absolute times move by the whole-day offset; relative timing stays.
		if !x.Start.IsZero() {
			if d := y.Start.Sub(x.Start); d != time.Duration(shift)*24*time.Hour {
				t.Errorf("sonication %d start moved by %v, want %d days", x.Number, d, shift)
			}
		}
	}
	if len(a.Structures) != len(b.Structures) {
		t.Fatalf("structures: %d, %d", len(a.Structures), len(b.Structures))
	}
	for n := range a.Structures {
		x, y := a.Structures[n], b.Structures[n]
		if x.Name != y.Name || x.Role != y.Role || !reflect.DeepEqual(x.Contours, y.Contours) {
			t.Errorf("structure %q differs", x.Name)
		}
		if y.FrameOfRef != b.FrameOfRef {
			t.Errorf("structure %q refers to %s, anatomy is %s", y.Name, y.FrameOfRef, b.FrameOfRef)
		}
	}
}

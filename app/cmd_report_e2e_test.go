//go:build cgo

package main

import (
	"bytes"
	"encoding/json"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dosecover/dosemap/sim"
)

// Invented identifying values given to a copy of the demo case (no real
// person or place).
var invented = []string{"TESTPERSON", "INVENTED", "Nowhere Test Clinic", "19580417", "INV-7731-QQ", "DRFICTIONAL", "OPFAKENAME"}

// demoCase writes a three-sonication cut of the demo session into a
// temporary folder (small enough for a test).
func demoCase(t *testing.T) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "demo")
	s := sim.DemoSession()
	s.Sonications = s.Sonications[:3]
	s.Motion = nil
	if _, err := sim.WriteSession(dir, s); err != nil {
		t.Fatalf("writing the demo case: %v", err)
	}
	return dir
}

// withIdentity copies the case in src to dst, giving every DICOM file the
// invented identifying values.
func withIdentity(t *testing.T, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, e fs.DirEntry, err error) error {
		if err != nil || e.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		out := filepath.Join(dst, rel)
		os.MkdirAll(filepath.Dir(out), 0o755)
		ds, err := dicom.ParseFile(p, nil, dicom.SkipProcessingPixelDataValue())
		if err != nil { // not DICOM: copy as is
			b, _ := os.ReadFile(p)
			return os.WriteFile(out, b, 0o644)
		}
		set := map[tag.Tag]string{
			tag.PatientName: "TESTPERSON^INVENTED", tag.PatientID: "INV-7731-QQ", tag.PatientBirthDate: "19580417",
			tag.InstitutionName: "Nowhere Test Clinic", tag.ReferringPhysicianName: "DRFICTIONAL^B", tag.OperatorsName: "OPFAKENAME",
		}
		for tg, v := range set {
			e, err := dicom.NewElement(tg, []string{v})
			if err != nil {
				return err
			}
			found := false
			for n, x := range ds.Elements {
				if x.Tag == tg {
					ds.Elements[n], found = e, true
				}
			}
			if !found {
				ds.Elements = append(ds.Elements, e)
			}
		}
		sortByTag(ds.Elements)
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

func sortByTag(es []*dicom.Element) {
	for i := 1; i < len(es); i++ {
		for j := i; j > 0 && es[j].Tag.Uint32() < es[j-1].Tag.Uint32(); j-- {
			es[j], es[j-1] = es[j-1], es[j]
		}
	}
}

// containsAny reports the invented values found in the files under dir.
func containsAny(t *testing.T, dir string, extra ...string) []string {
	t.Helper()
	var found []string
	filepath.WalkDir(dir, func(p string, e fs.DirEntry, err error) error {
		if err != nil || e.IsDir() {
			return err
		}
		b, _ := os.ReadFile(p)
		if strings.HasSuffix(p, ".pdf") {
			// PDF text sits in compressed, subset-encoded streams: search
			// the text a reader extracts too.
			txt, err := exec.Command("pdftotext", p, "-").Output()
			if err != nil && os.Getenv("CI") == "true" {
				t.Fatalf("pdftotext (poppler-utils) is required in CI: %v", err)
			}
			b = append(b, txt...)
		}
		for _, s := range append(append([]string{}, invented...), extra...) {
			for _, form := range []string{s, strings.ToUpper(s), strings.ToLower(s)} {
				if bytes.Contains(b, []byte(form)) || strings.Contains(e.Name(), form) {
					found = append(found, e.Name()+": "+form)
				}
			}
		}
		return nil
	})
	return found
}

type metricsDoc struct {
	Case    string `json:"case"`
	Metrics []struct {
		Name  string  `json:"name"`
		Value float64 `json:"value"`
	} `json:"metrics"`
}

func reportJSON(t *testing.T, args ...string) metricsDoc {
	t.Helper()
	outDir := t.TempDir()
	js := filepath.Join(outDir, "m.json")
	var out, errb bytes.Buffer
	full := append([]string{"report"}, args...)
	full = append(full, "--json", js, "-o", filepath.Join(outDir, "r.png"), "--pdf", filepath.Join(outDir, "r.pdf"),
		"--csv", filepath.Join(outDir, "m.csv"), "--trials", "0")
	if code := run(full, &out, &errb); code != 0 {
		t.Fatalf("%v: exit %d\n%s", full, code, errb.String())
	}
	b, _ := os.ReadFile(js)
	var d metricsDoc
	if err := json.Unmarshal(b, &d); err != nil {
		t.Fatal(err)
	}
	return d
}

// TestDeidentifyDemoRoundTrip gives a copy of the demo case invented
// identifying values, de-identifies it, and checks that no byte of any
// output (DICOM copy, report PNG and PDF, metrics JSON and CSV) holds them
// and that the de-identified copy gives exactly the same metrics.
func TestDeidentifyDemoRoundTrip(t *testing.T) {
	if testing.Short() {
		t.Skip("analyses the demo case three times")
	}
	root := t.TempDir()
	ident := filepath.Join(root, "TESTPERSON case")
	withIdentity(t, demoCase(t), ident)
	// The test can fail: the identified case's own report names it.
	orig := reportJSON(t, ident)
	if !strings.Contains(orig.Case, "TESTPERSON") {
		t.Fatalf("report of the identified copy is labelled %q", orig.Case)
	}
	copyDir := filepath.Join(root, "teaching")
	var out, errb bytes.Buffer
	if code := run([]string{"deidentify", ident, copyDir, "--salt", "round-trip"}, &out, &errb); code != 0 {
		t.Fatalf("deidentify: exit %d\n%s", code, errb.String())
	}
	if f := containsAny(t, copyDir); len(f) > 0 {
		t.Errorf("de-identified DICOM copy still holds %v", f)
	}
	deid := reportJSON(t, copyDir)
	if len(orig.Metrics) < 20 {
		t.Fatalf("only %d metrics in the original's report", len(orig.Metrics))
	}
	if len(deid.Metrics) != len(orig.Metrics) {
		t.Fatalf("%d metrics from the copy, %d from the original", len(deid.Metrics), len(orig.Metrics))
	}
	for n := range orig.Metrics {
		if deid.Metrics[n] != orig.Metrics[n] {
			t.Errorf("metric %s: copy %v, original %v", orig.Metrics[n].Name, deid.Metrics[n].Value, orig.Metrics[n].Value)
		}
	}
	// --deidentify hides identity in the outputs of the identified case.
	outDir := t.TempDir()
	args := []string{"report", ident, "--deidentify", "--trials", "0", "-o", filepath.Join(outDir, "r.png"),
		"--pdf", filepath.Join(outDir, "r.pdf"), "--json", filepath.Join(outDir, "m.json"), "--csv", filepath.Join(outDir, "m.csv")}
	if code := run(args, &out, &errb); code != 0 {
		t.Fatalf("report --deidentify: exit %d\n%s", code, errb.String())
	}
	if f := containsAny(t, outDir, "TESTPERSON case"); len(f) > 0 {
		t.Errorf("--deidentify outputs hold %v", f)
	}
	// And so does analyze --deidentify, in its JSON and its summary.
	aDir := t.TempDir()
	out.Reset()
	errb.Reset()
	if code := run([]string{"analyze", ident, "--deidentify", "--trials", "0", "--json", filepath.Join(aDir, "r.json")}, &out, &errb); code != 0 {
		t.Fatalf("analyze --deidentify: exit %d\n%s", code, errb.String())
	}
	os.WriteFile(filepath.Join(aDir, "stdout.txt"), out.Bytes(), 0o644)
	if f := containsAny(t, aDir, "TESTPERSON case"); len(f) > 0 {
		t.Errorf("analyze --deidentify outputs hold %v", f)
	}
	if !strings.Contains(out.String(), "Teaching case ") {
		t.Errorf("analyze --deidentify summary lacks the neutral label:\n%s", out.String())
	}
}

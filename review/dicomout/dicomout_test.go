package dicomout

import (
	"context"
	"io/fs"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/deid"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/sim"
	"dosecover/dosemap/testkit"
	"dosecover/review"
	"dosecover/review/report"
)

// need returns the path of an outside tool; missing, it skips the test,
// or fails it under CI=true.
func need(t *testing.T, names ...string) string {
	t.Helper()
	for _, n := range names {
		if p, err := exec.LookPath(n); err == nil {
			return p
		}
	}
	msg := names[0] + " not found (Debian dicom3tools for dciodvfy)"
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	t.Skip(msg)
	return ""
}

type analysed struct {
	dir  string
	c    *dosemap.Case
	r    *review.Result
	objs []Object
	pdf  []byte
}

var (
	demoOnce sync.Once
	demo     analysed
	demoErr  error
)

// named returns the result objects whose file names start with prefix
// ("report-", "dose-", "regions-").
func (a analysed) named(prefix string) []Object {
	var out []Object
	for _, o := range a.objs {
		if strings.HasPrefix(o.Name, prefix) {
			out = append(out, o)
		}
	}
	return out
}

// analysedDemo writes the demo case, analyses it with the default
// settings, renders the report PDF and builds the DICOM results.
func analysedDemo(t *testing.T) analysed {
	t.Helper()
	demoOnce.Do(func() {
		root, err := os.MkdirTemp("", "dosecover-dicomout-")
		if err != nil {
			demoErr = err
			return
		}
		cleanup = append(cleanup, root)
		dir := filepath.Join(root, "case")
		if _, demoErr = sim.WriteDemo(dir); demoErr != nil {
			return
		}
		ctx := context.Background()
		c, _, err := dicomio.Load(ctx, dir, dicomio.LoadOptions{}, nil)
		if err != nil {
			demoErr = err
			return
		}
		set := review.DefaultSettings()
		set.Trials = 0
		r, err := review.Analyze(ctx, c, set, nil)
		if err != nil {
			demoErr = err
			return
		}
		in, err := report.FromResult(c, r, report.Options{})
		if err != nil {
			demoErr = err
			return
		}
		pdfPath := filepath.Join(root, "report.pdf")
		if demoErr = report.Write(in, dir, report.Outputs{PDF: pdfPath}); demoErr != nil {
			return
		}
		pdf, err := os.ReadFile(pdfPath)
		if err != nil {
			demoErr = err
			return
		}
		src, err := ReadSource(dir, c)
		if err != nil {
			demoErr = err
			return
		}
		objs, _, err := Results(src, c, r, pdf, "Thermal dose coverage")
		if err != nil {
			demoErr = err
			return
		}
		demo = analysed{dir: dir, c: c, r: r, objs: objs, pdf: pdf}
	})
	if demoErr != nil {
		t.Fatal(demoErr)
	}
	return demo
}

var cleanup []string

func TestMain(m *testing.M) {
	code := m.Run()
	for _, d := range cleanup {
		os.RemoveAll(d)
	}
	os.Exit(code)
}

// Every object passes dciodvfy (dicom3tools, which checks the IOD of PS3.3
// named on its first line) without an error.
func TestDciodvfy(t *testing.T) {
	tool := need(t, "dciodvfy")
	a := analysedDemo(t)
	dir := t.TempDir()
	if err := Write(dir, a.objs); err != nil {
		t.Fatal(err)
	}
	want := map[string]string{"report-": "EncapsulatedPDF", "dose-": "MRImage", "regions-": "RTStructureSet"}
	seen := map[string]int{}
	for _, o := range a.objs {
		out, _ := exec.Command(tool, filepath.Join(dir, o.Name)).CombinedOutput()
		lines := strings.Split(strings.TrimSpace(string(out)), "\n")
		for prefix, iod := range want {
			if strings.HasPrefix(o.Name, prefix) {
				seen[prefix]++
				if lines[0] != iod {
					t.Errorf("%s: dciodvfy recognised %q, want %s", o.Name, lines[0], iod)
				}
			}
		}
		for _, l := range lines {
			if strings.HasPrefix(l, "Error") {
				t.Errorf("%s: %s", o.Name, l)
			}
		}
	}
	if seen["report-"] != 1 || seen["regions-"] != 1 || seen["dose-"] != a.r.Dose.Slices {
		t.Errorf("objects written: %v; want one report, one structure set and %d dose slices", seen, a.r.Dose.Slices)
	}
}

// pydicom (Debian python3-pydicom, python3-numpy for the pixels) reads
// every object: the PDF comes out byte for byte, the dose pixels decode,
// the structure set lists its ROIs, and each object carries the source
// StudyInstanceUID.
func TestPydicomReads(t *testing.T) {
	py := testkit.Python(t, "numpy")
	a := analysedDemo(t)
	dir := t.TempDir()
	if err := Write(dir, a.objs); err != nil {
		t.Fatal(err)
	}
	const script = `
import sys, glob, os, pydicom
d = sys.argv[1]
for p in sorted(glob.glob(os.path.join(d, '*.dcm'))):
    ds = pydicom.dcmread(p)
    name = os.path.basename(p)
    if name.startswith('report-'):
        doc = bytes(ds.EncapsulatedDocument)[:int(ds.EncapsulatedDocumentLength)]
        print('pdf', ds.StudyInstanceUID, len(doc), doc[:5].decode())
    elif name.startswith('dose-'):
        a = ds.pixel_array
        print('dose', ds.StudyInstanceUID, a.shape[0], a.shape[1], ds.RealWorldValueMappingSequence[0].LUTLabel)
    else:
        print('rtstruct', ds.StudyInstanceUID, len(ds.StructureSetROISequence))
`
	out, err := exec.Command(py, "-c", script, dir).CombinedOutput()
	if err != nil {
		t.Fatalf("pydicom: %v\n%s", err, out)
	}
	src, _ := ReadSource(a.dir, a.c)
	g := a.r.Dose.Geometry
	counts := map[string]int{}
	for _, l := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		f := strings.Fields(l)
		counts[f[0]]++
		if f[1] != src.StudyUID {
			t.Errorf("%s: study %s, want the source study %s", f[0], f[1], src.StudyUID)
		}
		switch f[0] {
		case "pdf":
			if f[2] != strconv.Itoa(len(a.pdf)) || f[3] != "%PDF-" {
				t.Errorf("pydicom read the PDF as %v, want %d bytes starting %%PDF-", f[2:], len(a.pdf))
			}
		case "dose":
			if f[2] != strconv.Itoa(g.Rows) || f[3] != strconv.Itoa(g.Cols) || f[4] != "CEM43" {
				t.Errorf("pydicom read a dose slice as %v, want %d×%d CEM43", f[2:], g.Rows, g.Cols)
			}
		case "rtstruct":
			if f[2] != "3" {
				t.Errorf("structure set with %s ROIs, want 3 (target, lethal, holes)", f[2])
			}
		}
	}
	if counts["pdf"] != 1 || counts["rtstruct"] != 1 || counts["dose"] != g.Slices {
		t.Errorf("pydicom read %v", counts)
	}
}

// The dose map read back by dosecover itself (dosemap/dicomio) beside the
// anatomy and the structures of the case gives the same coverage within
// 0.5 percentage point (the tolerance asked of the round trip). The
// stored dose is rounded to DoseSlope = 0.25 CEM43, which moves only
// voxels within 0.125 CEM43 of the threshold; most of the difference
// (0.3 point on the demo case, same monitored volume) comes from carrying
// the summed dose onto the analysis grid instead of each sonication's.
func TestDoseMapRoundTrip(t *testing.T) {
	a := analysedDemo(t)
	dir := t.TempDir()
	copyTree(t, filepath.Join(a.dir, sim.AnatomyFolder), filepath.Join(dir, "anatomy"))
	copyTree(t, filepath.Dir(filepath.Join(a.dir, sim.StructuresFile)), filepath.Join(dir, "structures"))
	dose := a.named("dose-")
	if err := Write(filepath.Join(dir, "dose"), dose); err != nil {
		t.Fatal(err)
	}
	c, inv, err := dicomio.Load(t.Context(), dir, dicomio.LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Sonications) != 1 || c.Sonications[0].Dose == nil {
		t.Fatalf("read back %d sonications (want one dose map); problems %q", len(c.Sonications), inv.Problems)
	}
	set := review.DefaultSettings()
	set.Trials = 0
	r, err := review.Analyze(t.Context(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	if d := 100 * math.Abs((*r.CoveredFraction)-(*a.r.CoveredFraction)); d > 0.5 {
		t.Errorf("coverage read back %.2f %%, analysed %.2f %%: differ by %.2f points (> 0.5)", 100*(*r.CoveredFraction), 100*(*a.r.CoveredFraction), d)
	}
	t.Logf("coverage %.3f %% from the thermometry, %.3f %% from the dose map; monitored %.4f, %.4f; covered mL %.4f, %.4f", 100*(*a.r.CoveredFraction), 100*(*r.CoveredFraction), a.r.MonitoredFraction, r.MonitoredFraction, a.r.CoveredVolumeML, r.CoveredVolumeML)
}

// Stored back into its own study, the cumulative dose map is read beside
// the thermometry it sums without being added to it: the same coverage to
// the last digit, and the inventory says why the series is left out.
func TestDoseMapBesideThermometry(t *testing.T) {
	a := analysedDemo(t)
	dir := t.TempDir()
	copyTree(t, a.dir, dir)
	dose := a.named("dose-")
	if err := Write(filepath.Join(dir, "results"), dose); err != nil {
		t.Fatal(err)
	}
	c, inv, err := dicomio.Load(t.Context(), dir, dicomio.LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Sonications) != len(a.c.Sonications) {
		t.Errorf("%d sonications with the stored dose map beside them, want %d", len(c.Sonications), len(a.c.Sonications))
	}
	if !strings.Contains(strings.Join(inv.Problems, "\n"), "cumulative dose of an earlier review") {
		t.Errorf("problems %q do not name the dose map left out", inv.Problems)
	}
	set := review.DefaultSettings()
	set.Trials = 0
	r, err := review.Analyze(t.Context(), c, set, nil)
	if err != nil {
		t.Fatal(err)
	}
	if (*r.CoveredFraction) != (*a.r.CoveredFraction) {
		t.Errorf("coverage %.4f with the stored dose map beside the thermometry, %.4f without", (*r.CoveredFraction), (*a.r.CoveredFraction))
	}
}

// The structure set read back by dosecover's reader holds the target as
// it was, and a lethal region whose volume (rasterised on the analysis
// grid by review.Occupancy) is the lethal volume of the analysis within
// 5 % (outlines pass through voxel edges' midpoints; common practice for
// a voxel-outline round trip, from memory).
func TestStructuresRoundTrip(t *testing.T) {
	a := analysedDemo(t)
	regions := a.named("regions-")
	if len(regions) != 1 {
		t.Fatalf("%d structure sets, want 1", len(regions))
	}
	obj := regions[0]
	ss, _, err := dicomio.ReadStructureSet(obj.Name, obj.Data)
	if err != nil {
		t.Fatal(err)
	}
	if len(ss) != 3 || ss[0].Name != a.c.Target().Name+" (as reviewed)" || len(ss[0].Contours) != len(a.c.Target().Contours) {
		t.Fatalf("structures read back: %d; want the target %q first", len(ss), a.c.Target().Name)
	}
	for _, st := range ss {
		if st.Role == dosemap.RoleTarget {
			t.Errorf("result structure %q read back as a target", st.Name)
		}
	}
	g := a.r.Grid.Geometry
	occ, err := review.Occupancy(&ss[1], g, g.Spacing[2])
	if err != nil {
		t.Fatal(err)
	}
	var ml float64
	for _, f := range occ {
		ml += float64(f)
	}
	ml *= g.Spacing[0] * g.Spacing[1] * g.Spacing[2] / 1000
	if math.Abs(ml-a.r.LethalVolumeML) > 0.05*a.r.LethalVolumeML {
		t.Errorf("lethal region read back %.3f mL, analysis %.3f mL", ml, a.r.LethalVolumeML)
	}
}

// With identity removed the objects carry the label, not the patient, and
// a study UID that is not the source's.
func TestDeidentified(t *testing.T) {
	a := analysedDemo(t)
	src, err := ReadSource(a.dir, a.c)
	if err != nil {
		t.Fatal(err)
	}
	d, err := deid.New(deid.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if len(src.Series) != len(a.c.Sonications)+1 {
		t.Errorf("source refers to %d series, want the anatomy and %d sonications", len(src.Series), len(a.c.Sonications))
	}
	ds := src.Deidentified(d, "Teaching case 0A1B2C3D")
	objs, _, err := Results(ds, a.c, a.r, a.pdf, "Thermal dose coverage")
	if err != nil {
		t.Fatal(err)
	}
	for _, o := range objs {
		s := string(o.Data)
		for _, secret := range append([]string{src.PatientName, src.PatientID, src.StudyUID}, src.Series...) {
			if strings.Contains(s, secret) {
				t.Errorf("%s holds %q", o.Name, secret)
			}
		}
	}
}

func copyTree(t *testing.T, from, to string) {
	t.Helper()
	err := filepath.WalkDir(from, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(from, p)
		if d.IsDir() {
			return os.MkdirAll(filepath.Join(to, rel), 0o755)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(to, rel), b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
}

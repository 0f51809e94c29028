package sim

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io/fs"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"sort"
	"strings"
	"sync"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/testkit"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// The demo case is written once per test binary and shared.
var (
	demoOnce  sync.Once
	demoPath  string
	demoTruth *Truth
	demoErr   error
	demoTmp   string
)

func TestMain(m *testing.M) {
	code := m.Run()
	if demoTmp != "" {
		os.RemoveAll(demoTmp)
	}
	os.Exit(code)
}

func demo(t testing.TB) (string, *Truth) {
	t.Helper()
	demoOnce.Do(func() {
		demoTmp, demoErr = os.MkdirTemp("", "dosecover-sim-test-")
		if demoErr != nil {
			return
		}
		demoPath = filepath.Join(demoTmp, "demo")
		demoTruth, demoErr = WriteDemo(demoPath)
	})
	if demoErr != nil {
		t.Fatal(demoErr)
	}
	return demoPath, demoTruth
}

// smallSession is the demo scenario cut to three sonications, for tests
// that write a session more than once.
func smallSession() *Session {
	s := DemoSession()
	s.Sonications = s.Sonications[:3]
	s.Motion = nil
	return s
}

// needTool returns the path of an outside tool, or skips (fails under
// CI=true) when it is missing.
func needTool(t *testing.T, name string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		missing(t, fmt.Sprintf("%s not found (Debian package dicom3tools provides dciodvfy): %v", name, err))
	}
	return p
}

func missing(t *testing.T, msg string) {
	t.Helper()
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	t.Skip(msg)
}

func TestUID(t *testing.T) {
	// PS3.5 §9.1: at most 64 characters, digits and dots, no component with
	// a leading zero; Annex B.2: "2.25." followed by the UUID as an integer.
	valid := regexp.MustCompile(`^2\.25\.(0|[1-9][0-9]*)$`)
	seen := map[string]string{}
	for _, name := range []string{"a", "b", "demo/1/study", "demo/1/frame-of-reference", strings.Repeat("x", 300)} {
		u := UID(name)
		if len(u) > 64 || !valid.MatchString(u) {
			t.Errorf("UID(%q) = %q is not a valid UUID-derived UID", name, u)
		}
		if UID(name) != u {
			t.Errorf("UID(%q) is not deterministic", name)
		}
		if o, dup := seen[u]; dup {
			t.Errorf("UID(%q) = UID(%q)", name, o)
		}
		seen[u] = name
	}
}

func TestPhaseStored(t *testing.T) {
	// [−π, π) onto [−2048, 2047], 2π-periodic.
	cases := []struct {
		phi  float64
		want int16
	}{
		{0, 0}, {-math.Pi, -2048}, {math.Pi, -2048}, {math.Pi - PhaseScale, 2047},
		{math.Pi / 2, 1024}, {-math.Pi / 2, -1024}, {2*math.Pi + 1, int16(math.Round(1 / PhaseScale))},
		{-3 * math.Pi / 2, 1024},
	}
	for _, c := range cases {
		if got := int16(phaseStored(c.phi)); got != c.want {
			t.Errorf("phaseStored(%g) = %d, want %d", c.phi, got, c.want)
		}
	}
}

// The PRF phase per degree at 3 T, TE 12.8 ms, α = −0.01 ppm/°C is
// −0.1027 rad/°C (testdata/check-values.md: computed from γ/2π = 42.57747892 MHz/T,
// CODATA 2014).
func TestPhasePerDegree(t *testing.T) {
	p := baseProtocol(dosemap.Vec3{})
	if got := p.PhasePerDegree(); math.Abs(got-(-0.1027)) > 5e-5 {
		t.Errorf("PhasePerDegree = %g rad/°C, want -0.1027", got)
	}
	p.Sign = -1
	if got := p.PhasePerDegree(); math.Abs(got-0.1027) > 5e-5 {
		t.Errorf("PhasePerDegree with Sign -1 = %g rad/°C, want +0.1027", got)
	}
}

func TestDemoScenario(t *testing.T) {
	dir, tr := demo(t)
	if tr.PatientName != "PHANTOM^GEL" || tr.PatientID != "DEMO-001" {
		t.Errorf("patient %q %q", tr.PatientName, tr.PatientID)
	}
	if len(tr.Planned) != 16 || len(tr.Sonications) != 15 {
		t.Fatalf("%d planned spots, %d sonications; want 16 and 15", len(tr.Planned), len(tr.Sonications))
	}
	if fmt.Sprint(tr.Undelivered) != "[4 8]" || fmt.Sprint(tr.Spill) != "[7]" {
		t.Errorf("undelivered %v, spill %v; want [4 8] and [7]", tr.Undelivered, tr.Spill)
	}
	// The largest hole lies near the undelivered spots (within 4 mm of
	// their midpoint) and the target is otherwise mostly covered.
	if len(tr.Holes) == 0 {
		t.Fatal("no hole in the demo truth")
	}
	mid := tr.Planned[3].Position.Add(tr.Planned[7].Position).Scale(0.5)
	if d := tr.Holes[0].Center.Sub(mid).Norm(); d > 4 {
		t.Errorf("largest hole at %v, %.1f mm from the undelivered spots' midpoint %v", tr.Holes[0].Center, d, mid)
	}
	if tr.CoveredFraction < 0.85 || tr.CoveredFraction > 0.97 {
		t.Errorf("covered fraction %.3f; the scenario wants a mostly covered target with one hole", tr.CoveredFraction)
	}
	if tr.LethalOutsideMM3 < 50 {
		t.Errorf("lethal volume outside the margin %.0f mm³; the spill should leave more", tr.LethalOutsideMM3)
	}
	if tr.LethalOutsideAvoid != 0 {
		t.Errorf("lethal dose in the avoid tube: %.0f mm³", tr.LethalOutsideAvoid)
	}
	// What the thermometry can show (noiseless): the largest hole is again
	// the undelivered spots', most of the target is covered, and the spill
	// leaves lethal dose outside the margin.
	m := tr.Measured
	if len(m.Holes) == 0 {
		t.Fatal("no hole in the thermometry-grid truth")
	}
	if d := m.Holes[0].Center.Sub(mid).Norm(); d > 4 {
		t.Errorf("largest thermometry-grid hole at %v, %.1f mm from %v", m.Holes[0].Center, d, mid)
	}
	if m.CoveredFraction < 0.8 || m.CoveredFraction > 0.95 || m.LethalOutsideMM3 < 50 {
		t.Errorf("thermometry-grid coverage %.3f, lethal outside margin %.0f mm³", m.CoveredFraction, m.LethalOutsideMM3)
	}
	// Ablative peaks as thermometry shows them: about 55-70 °C (facts of
	// the trade in testdata/check-values.md: 55-60 °C common; the demo runs hot to
	// cover the gaps between spots).
	for n, pk := range m.PeakTemp {
		if pk < 55 || pk > 70 {
			t.Errorf("sonication %d peaks at %.1f °C on the thermometry grid", n+1, pk)
		}
	}
	// Residual heat: later sonications start above the base temperature.
	if last := tr.Sonications[len(tr.Sonications)-1]; last.StartTemp <= 37.2 {
		t.Errorf("no residual heat at the last sonication (%.2f °C)", last.StartTemp)
	}
	// Size and file count.
	var size int64
	var files int
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			fi, _ := d.Info()
			size += fi.Size()
			files++
		}
		return nil
	})
	if size > 15<<20 {
		t.Errorf("demo folder holds %d bytes, over 15 MB", size)
	}
	if files != tr.Files+1 { // + truth.json
		t.Errorf("%d files on disk, truth says %d + truth.json", files, tr.Files)
	}
	t.Logf("demo: %d files, %.1f MB; bioheat: covered %.3f, hole %.0f mm³ at %v, lethal outside margin %.0f mm³; thermometry grid: covered %.3f, hole %.0f mm³ at %v, outside %.0f mm³",
		files, float64(size)/1e6, tr.CoveredFraction, tr.Holes[0].VolumeMM3, tr.Holes[0].Center, tr.LethalOutsideMM3,
		m.CoveredFraction, m.Holes[0].VolumeMM3, m.Holes[0].Center, m.LethalOutsideMM3)
	// truth.json reads back.
	raw, err := os.ReadFile(filepath.Join(dir, TruthFile))
	if err != nil {
		t.Fatal(err)
	}
	var back Truth
	if err := json.Unmarshal(raw, &back); err != nil {
		t.Fatal(err)
	}
	if back.Holes[0] != tr.Holes[0] || back.FrameOfReferenceUID != tr.FrameOfReferenceUID {
		t.Error("truth.json does not match the returned truth")
	}
}

func hashTree(t *testing.T, dir string) map[string]string {
	t.Helper()
	out := map[string]string{}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		h := sha256.Sum256(b)
		rel, _ := filepath.Rel(dir, p)
		out[rel] = hex.EncodeToString(h[:])
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// Same seed, same bytes; another seed, other noise.
func TestDeterministic(t *testing.T) {
	var trees []map[string]string
	for _, seed := range []uint64{5, 5, 6} {
		dir := t.TempDir()
		s := smallSession()
		s.Seed = seed
		if _, err := WriteSession(dir, s); err != nil {
			t.Fatal(err)
		}
		trees = append(trees, hashTree(t, dir))
	}
	if len(trees[0]) < 100 {
		t.Fatalf("only %d files", len(trees[0]))
	}
	for name, h := range trees[0] {
		if trees[1][name] != h {
			t.Errorf("%s differs between two runs with the same seed", name)
		}
	}
	if len(trees[0]) != len(trees[1]) {
		t.Errorf("%d and %d files", len(trees[0]), len(trees[1]))
	}
	same := 0
	for name, h := range trees[0] {
		if trees[2][name] == h {
			same++
		}
	}
	if same > 0 {
		t.Errorf("%d files identical under another seed", same)
	}
}

// The full demo is deterministic too (two complete runs; skipped in short
// mode).
func TestDemoDeterministic(t *testing.T) {
	if testing.Short() {
		t.Skip("writes the demo twice")
	}
	dir, _ := demo(t)
	again := t.TempDir()
	if _, err := WriteDemo(again); err != nil {
		t.Fatal(err)
	}
	a, b := hashTree(t, dir), hashTree(t, again)
	if len(a) != len(b) {
		t.Fatalf("%d and %d files", len(a), len(b))
	}
	for name, h := range a {
		if b[name] != h {
			t.Errorf("%s differs between two runs", name)
		}
	}
}

func TestDemoDir(t *testing.T) {
	parent := t.TempDir()
	calls := 0
	write := func(dir string) error {
		calls++
		_, err := WriteSession(dir, smallSession())
		return err
	}
	// A failed generation leaves nothing behind.
	if _, err := demoDirIn(parent, func(string) error { return os.ErrPermission }); err == nil {
		t.Fatal("failed generation reported success")
	}
	if entries, _ := os.ReadDir(parent); len(entries) != 0 {
		t.Fatalf("failed generation left %v", entries)
	}
	d1, err := demoDirIn(parent, write)
	if err != nil {
		t.Fatal(err)
	}
	if want := fmt.Sprintf("demo-%s-r%d", dosemap.Version, Revision); filepath.Base(d1) != want { // the documented cache name
		t.Errorf("demo folder %s", d1)
	}
	st, err := os.Stat(filepath.Join(d1, TruthFile))
	if err != nil {
		t.Fatal(err)
	}
	// Second use: no regeneration.
	d2, err := demoDirIn(parent, write)
	if err != nil || d2 != d1 || calls != 1 {
		t.Fatalf("second call: %s, %v, %d generations", d2, err, calls)
	}
	st2, _ := os.Stat(filepath.Join(d1, TruthFile))
	if !st2.ModTime().Equal(st.ModTime()) {
		t.Error("demo regenerated on second use")
	}
	entries, _ := os.ReadDir(parent)
	if len(entries) != 1 {
		t.Errorf("temporary folders left behind: %v", entries)
	}
}

func TestWriteCasesRefusesExisting(t *testing.T) {
	dir := t.TempDir()
	os.Mkdir(filepath.Join(dir, "case-001"), 0o755)
	if _, err := WriteCases(dir, 1, 3); err == nil || !strings.Contains(err.Error(), "case-001") {
		t.Errorf("existing case folder: err = %v", err)
	}
}

func TestVariedSessionsValid(t *testing.T) {
	// Every varied case is a valid session with spots, sonications and a
	// lesion inside the thermometry slab; parameters differ between cases.
	b0 := map[float64]bool{}
	for n := 1; n <= 30; n++ {
		s := VariedSession(n, 11)
		if err := s.Validate(); err != nil {
			t.Fatalf("case %d: %v", n, err)
		}
		b0[s.Thermometry.B0] = true
		g := s.ThermometryGeometry()
		l := s.Phantom.Lesion
		for _, c := range []dosemap.Vec3{l.Center.Sub(l.SemiAxes), l.Center.Add(l.SemiAxes)} {
			i, j, k := g.Voxel(c)
			if i < 0 || j < 0 || k < -0.5 || i > float64(g.Cols-1) || j > float64(g.Rows-1) || k > float64(g.Slices)-0.5 {
				t.Errorf("case %d: lesion corner %v outside the thermometry slab (%.1f %.1f %.1f)", n, c, i, j, k)
			}
		}
	}
	if len(b0) < 2 {
		t.Error("varied cases all use one field strength")
	}
	if VariedSession(3, 11).Phantom.Lesion != VariedSession(3, 11).Phantom.Lesion {
		t.Error("VariedSession is not deterministic")
	}
}

func TestValidateRejects(t *testing.T) {
	cases := map[string]func(s *Session){
		"no sonications":   func(s *Session) { s.Sonications = nil },
		"long sonication":  func(s *Session) { s.Sonications[0].Duration = 1000 },
		"bad planned spot": func(s *Session) { s.Sonications[0].Planned = 99 },
		"motion outside":   func(s *Session) { s.Motion = []Motion{{Sonication: 99, Frame: 1}} },
		"no baseline":      func(s *Session) { s.Thermometry.BaselineFrames = 0 },
		"zero TE":          func(s *Session) { s.Thermometry.TE = 0 },
	}
	for name, mod := range cases {
		s := smallSession()
		mod(s)
		if err := s.Validate(); err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
}

// dciodvfy (dicom3tools) validates files against their IOD; lines starting
// "Error" fail the test, warnings are logged.
func TestDciodvfy(t *testing.T) {
	tool := needTool(t, "dciodvfy")
	dir, _ := demo(t)
	for f, iod := range map[string]string{
		filepath.Join(AnatomyFolder, "IM0001.dcm"): "MRImage",
		"sonication-01/IM00001.dcm":                "MRImage", // magnitude
		"sonication-01/IM00002.dcm":                "MRImage", // phase
		StructuresFile:                             "RTStructureSet",
	} {
		out, _ := exec.Command(tool, filepath.Join(dir, f)).CombinedOutput()
		// dciodvfy first names the IOD it recognised; without that line
		// the file was not validated at all.
		if first, _, _ := strings.Cut(string(out), "\n"); strings.TrimSpace(first) != iod {
			t.Errorf("%s: dciodvfy recognised %q, want %s", f, first, iod)
		}
		for _, line := range strings.Split(string(out), "\n") {
			switch {
			case strings.HasPrefix(line, "Error"):
				t.Errorf("%s: %s", f, line)
			case strings.HasPrefix(line, "Warning"):
				t.Logf("%s: %s", f, line)
			}
		}
	}
}

// pydicom (a general-purpose reference reader) sees the geometry and the
// pixel values the simulator meant to write.
func TestPydicomReadsWhatWasWritten(t *testing.T) {
	py := testkit.Python(t, "numpy")
	dir, tr := demo(t)
	script := `
import json, sys, pydicom
out = []
for p in sys.argv[1:]:
    d = pydicom.dcmread(p)
    a = d.pixel_array
    out.append({"ipp": [float(x) for x in d.ImagePositionPatient],
                "iop": [float(x) for x in d.ImageOrientationPatient],
                "spacing": [float(x) for x in d.PixelSpacing],
                "thickness": float(d.SliceThickness),
                "rows": int(d.Rows), "cols": int(d.Columns),
                "dtype": str(a.dtype), "sum": int(a.astype("int64").sum()),
                "px": [int(a[r, c]) for r, c in [(0, 0), (10, 20), (31, 33), (a.shape[0]-1, a.shape[1]-1)]],
                "te": float(d.EchoTime), "b0": float(d.MagneticFieldStrength),
                "frame": d.FrameOfReferenceUID, "series": d.SeriesInstanceUID,
                "type": list(d.ImageType)})
print(json.dumps(out))
`
	files := []string{filepath.Join(AnatomyFolder, "IM0005.dcm"), "sonication-03/IM00013.dcm", "sonication-03/IM00014.dcm"}
	args := []string{"-c", script}
	for _, f := range files {
		args = append(args, filepath.Join(dir, f))
	}
	raw, err := exec.Command(py, args...).Output()
	if err != nil {
		t.Fatalf("pydicom: %v", err)
	}
	var got []struct {
		IPP, IOP, Spacing []float64
		Thickness         float64
		Rows, Cols        int
		Dtype             string
		Sum               int64
		Px                []int
		TE, B0            float64
		Frame, Series     string
		Type              []string
	}
	if err := json.Unmarshal(raw, &got); err != nil {
		t.Fatal(err)
	}
	s := DemoSession()
	ag, tg := s.AnatomyGeometry(), s.ThermometryGeometry()
	// File 0: anatomy slice 5 (k = 4). Files 1, 2: sonication 3,
	// instances 13 and 14, magnitude then phase of slice k = 6 mod S
	// (instance = (f*S+k)*2+c+1).
	want := []struct {
		g      dosemap.Geometry
		k      int
		signed bool
		series string
		typ    string
	}{{ag, 4, false, tr.AnatomySeriesUID, "M"}, {tg, 6 % tg.Slices, false, tr.Sonications[2].SeriesUID, "M"}, {tg, 6 % tg.Slices, true, tr.Sonications[2].SeriesUID, "P"}}
	for n, w := range want {
		g := got[n]
		ipp := w.g.Point(0, 0, float64(w.k))
		for ax := 0; ax < 3; ax++ {
			if math.Abs(g.IPP[ax]-ipp[ax]) > 1e-3 {
				t.Errorf("%s: IPP %v, want %v", files[n], g.IPP, ipp)
				break
			}
		}
		if math.Abs(g.Spacing[0]-w.g.Spacing[1]) > 1e-9 || math.Abs(g.Spacing[1]-w.g.Spacing[0]) > 1e-9 || g.Rows != w.g.Rows || g.Cols != w.g.Cols {
			t.Errorf("%s: spacing %v, %d×%d", files[n], g.Spacing, g.Rows, g.Cols)
		}
		if fmt.Sprint(g.IOP) != "[1 0 0 0 1 0]" || math.Abs(g.Thickness-w.g.Spacing[2]) > 1e-9 {
			t.Errorf("%s: IOP %v thickness %g", files[n], g.IOP, g.Thickness)
		}
		if g.Frame != tr.FrameOfReferenceUID || g.Series != w.series || g.Type[2] != w.typ || g.B0 != 3 {
			t.Errorf("%s: frame %s series %s type %v B0 %g", files[n], g.Frame, g.Series, g.Type, g.B0)
		}
		if wantDtype := map[bool]string{false: "uint16", true: "int16"}[w.signed]; g.Dtype != wantDtype {
			t.Errorf("%s: pydicom dtype %s, want %s", files[n], g.Dtype, wantDtype)
		}
		// Pixel values against the Go library's parse of the same file.
		px, sum := goPixels(t, filepath.Join(dir, files[n]), w.signed)
		cols := g.Cols
		for m, rc := range [][2]int{{0, 0}, {10, 20}, {31, 33}, {g.Rows - 1, g.Cols - 1}} {
			if px[rc[0]*cols+rc[1]] != g.Px[m] {
				t.Errorf("%s: pixel %v pydicom %d, written %d", files[n], rc, g.Px[m], px[rc[0]*cols+rc[1]])
			}
		}
		if sum != g.Sum {
			t.Errorf("%s: pixel sum pydicom %d, written %d", files[n], g.Sum, sum)
		}
		if w.signed && (g.TE != 12.8) {
			t.Errorf("%s: EchoTime %g ms", files[n], g.TE)
		}
	}
}

// goPixels parses a file with the Go DICOM library and returns its stored
// values (int16 for signed data: the library returns uint16 regardless of
// PixelRepresentation).
func goPixels(t *testing.T, path string, signed bool) ([]int, int64) {
	t.Helper()
	ds, err := dicom.ParseFile(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	var el *dicom.Element
	for _, e := range ds.Elements {
		if e.Tag == tag.PixelData {
			el = e
		}
	}
	if el == nil {
		t.Fatalf("%s: no PixelData", path)
	}
	info := dicom.MustGetPixelDataInfo(el.Value)
	f, err := info.Frames[0].GetNativeFrame()
	if err != nil {
		t.Fatal(err)
	}
	raw := f.RawDataSlice().([]uint16)
	out := make([]int, len(raw))
	var sum int64
	for n, v := range raw {
		if signed {
			out[n] = int(int16(v))
		} else {
			out[n] = int(v)
		}
		sum += int64(out[n])
	}
	return out, sum
}

// The written phase encodes the simulated temperature rise by the PRF
// relation Δφ = Sign·γ·α·B0·TE·ΔT (testdata/check-values.md: 0.1027 rad/°C at 3 T,
// TE 12.8 ms) plus the stated drift. Over the 20 hottest voxels of the
// hottest frame, the temperature recovered from the stored phase matches
// the simulation within 1.5 °C each (5σ of the phase-difference noise
// √2/SNR ≈ 0.028 rad ≈ 0.28 °C at SNR 50, testdata/check-values.md) and 0.3 °C on
// average.
func TestPhaseEncodesTemperature(t *testing.T) {
	dir := t.TempDir()
	s := smallSession()
	res, err := s.simulate()
	if err != nil {
		t.Fatal(err)
	}
	tr, err := WriteSession(dir, s)
	if err != nil {
		t.Fatal(err)
	}
	p := s.Thermometry
	g := s.ThermometryGeometry()
	const son = 1 // second sonication: residual heat present
	frames := res.frames[son]
	hot := 0
	for f := range frames {
		if maxOf(frames[f]) > maxOf(frames[hot]) {
			hot = f
		}
	}
	// Voxels ordered by simulated rise in the hot frame.
	idx := make([]int, g.Len())
	for n := range idx {
		idx[n] = n
	}
	sort.Slice(idx, func(a, b int) bool { return frames[hot][idx[a]] > frames[hot][idx[b]] })
	read := func(frame, k int) []int {
		inst := (frame*g.Slices+k)*2 + 2
		px, _ := goPixels(t, filepath.Join(dir, fmt.Sprintf(sonicationFolder, son+1), fmt.Sprintf("IM%05d.dcm", inst)), true)
		return px
	}
	ppd := p.PhasePerDegree()
	var sum float64
	for _, v := range idx[:20] {
		i, _, k := g.IJK(v)
		n := v - k*g.SliceLen()
		phi0 := float64(read(0, k)[n]) * PhaseScale
		phi1 := float64(read(hot, k)[n]) * PhaseScale
		d := math.Remainder(phi1-phi0, 2*math.Pi)
		dt := float64(hot) * p.FrameInterval
		x := g.Point(float64(i), 0, 0)[0] - s.Phantom.Center[0]
		d -= (p.DriftRate + p.DriftGradient*x/100) * dt
		got := d / ppd
		want := float64(frames[hot][v] - frames[0][v])
		if math.Abs(got-want) > 1.5 {
			t.Errorf("voxel %d: phase gives %.2f °C rise, simulation %.2f °C", v, got, want)
		}
		sum += got - want
	}
	if mean := sum / 20; math.Abs(mean) > 0.3 {
		t.Errorf("mean error %.2f °C over the hottest voxels", mean)
	}
	if tr.Sonications[son].StartTemp <= s.Phantom.BodyTemp {
		t.Errorf("no residual heat at the start of sonication %d", son+1)
	}
}

func maxOf(x []float32) float32 {
	m := float32(math.Inf(-1))
	for _, v := range x {
		m = max(m, v)
	}
	return m
}

// ContourData is written as one value list of x\y\z triplets that a
// reader splits back into the same points.
func TestRTStructContourData(t *testing.T) {
	dir, _ := demo(t)
	ds, err := dicom.ParseFile(filepath.Join(dir, StructuresFile), nil)
	if err != nil {
		t.Fatal(err)
	}
	s := DemoSession()
	target, avoid, _ := s.Contours()
	var data [][]string
	var walk func(es []*dicom.Element)
	walk = func(es []*dicom.Element) {
		for _, e := range es {
			if e.Tag == tag.ContourData {
				vals := dicom.MustGetStrings(e.Value)
				data = append(data, strings.Split(strings.Join(vals, `\`), `\`))
			}
			if e.Value.ValueType() == dicom.Sequences {
				for _, it := range e.Value.GetValue().([]*dicom.SequenceItemValue) {
					walk(it.GetValue().([]*dicom.Element))
				}
			}
		}
	}
	walk(ds.Elements)
	if len(data) != len(target)+len(avoid) {
		t.Fatalf("%d ContourData elements, want %d", len(data), len(target)+len(avoid))
	}
	first := target[0].Points
	if len(data[0]) != 3*len(first) {
		t.Fatalf("first contour has %d values, want %d", len(data[0]), 3*len(first))
	}
	for n, p := range first {
		for ax := 0; ax < 3; ax++ {
			var v float64
			fmt.Sscan(data[0][3*n+ax], &v)
			if math.Abs(v-p[ax]) > 5e-4 {
				t.Fatalf("point %d axis %d: %g, want %g", n, ax, v, p[ax])
			}
		}
	}
	// Target contours lie on the lesion surface (within rounding).
	l := s.Phantom.Lesion
	for _, c := range target {
		for _, p := range c.Points {
			if lv := l.level(p); math.Abs(lv-1) > 1e-9 {
				t.Fatalf("target vertex %v off the lesion surface (level %g)", p, lv)
			}
		}
	}
	if !bytes.Contains(mustRead(t, filepath.Join(dir, StructuresFile)), []byte("AVOIDANCE")) {
		t.Error("no AVOIDANCE ROI")
	}
}

func mustRead(t *testing.T, p string) []byte {
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// BenchmarkWriteSession writes sessions of increasing size: the three-
// sonication cut of the demo, the demo, and the typical session
// (24 sonications × 14 frames × 6 slices of 128×128). Run with
// -benchtime=1x.
func BenchmarkWriteSession(b *testing.B) {
	for _, bc := range []struct {
		name string
		s    func() *Session
	}{{"small", smallSession}, {"demo", DemoSession}, {"typical", func() *Session { return TypicalSession(1) }}} {
		b.Run(bc.name, func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				dir := b.TempDir()
				tr, err := WriteSession(dir, bc.s())
				if err != nil {
					b.Fatal(err)
				}
				b.ReportMetric(float64(tr.Files), "files")
			}
		})
	}
}

// pydicom reads the structure set: ROI names and interpreted types, the
// number of contours and the first vertex, and the referenced frame of
// reference.
func TestPydicomReadsStructures(t *testing.T) {
	py := testkit.Python(t, "numpy")
	dir, tr := demo(t)
	script := `
import json, sys, pydicom
d = pydicom.dcmread(sys.argv[1])
print(json.dumps({
  "rois": [[int(r.ROINumber), r.ROIName, r.ReferencedFrameOfReferenceUID] for r in d.StructureSetROISequence],
  "types": [o.RTROIInterpretedType for o in d.RTROIObservationsSequence],
  "contours": [len(c.ContourSequence) for c in d.ROIContourSequence],
  "first": [float(x) for x in d.ROIContourSequence[0].ContourSequence[0].ContourData[:3]],
  "npoints": int(d.ROIContourSequence[0].ContourSequence[0].NumberOfContourPoints),
  "frame": d.ReferencedFrameOfReferenceSequence[0].FrameOfReferenceUID,
  "modality": d.Modality}))
`
	raw, err := exec.Command(py, "-c", script, filepath.Join(dir, StructuresFile)).Output()
	if err != nil {
		t.Fatalf("pydicom: %v", err)
	}
	var got struct {
		ROIs     [][]any
		Types    []string
		Contours []int
		First    []float64
		NPoints  int
		Frame    string
		Modality string
	}
	if err := json.Unmarshal(raw, &got); err != nil {
		t.Fatal(err)
	}
	target, avoid, _ := DemoSession().Contours()
	if got.Modality != "RTSTRUCT" || got.Frame != tr.FrameOfReferenceUID || fmt.Sprint(got.Types) != "[PTV AVOIDANCE]" {
		t.Errorf("modality %s frame %s types %v", got.Modality, got.Frame, got.Types)
	}
	if len(got.ROIs) != 2 || got.ROIs[0][1] != "Target" || got.ROIs[0][2] != tr.FrameOfReferenceUID {
		t.Errorf("ROIs %v", got.ROIs)
	}
	if fmt.Sprint(got.Contours) != fmt.Sprint([]int{len(target), len(avoid)}) || got.NPoints != len(target[0].Points) {
		t.Errorf("contours %v points %d", got.Contours, got.NPoints)
	}
	for ax := 0; ax < 3; ax++ {
		if math.Abs(got.First[ax]-target[0].Points[0][ax]) > 5e-4 {
			t.Errorf("first vertex %v, want %v", got.First, target[0].Points[0])
			break
		}
	}
}

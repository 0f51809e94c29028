package dicomio

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomwrite"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

const testFoR = "2.25.777"

// phaseU16 is the stored value of the unsigned synthetic phase.
func phaseU16(i, j, k, t int) int { return (i*1000 + j*100 + k*7 + t*50) % 65536 }

// phaseS12 is the (signed) value of the 12-bit synthetic phase.
func phaseS12(i, j, k, t int) int { return -2048 + i*500 + j*3 + k + t*20 }

// writeTestCase writes anatomy, two thermometry acquisitions (phase and
// magnitude in one series; signed 12-bit phase with its magnitude in a
// separate series, no temporal position identifiers), a structure set, a
// truncated file and a text file.
func writeTestCase(t *testing.T) string {
	dir := t.TempDir()
	mrSpec{Dir: dir, SeriesUID: "2.25.101", Desc: "T2 anatomy", FoR: testFoR, Number: 1,
		Cols: 16, Rows: 16, Slices: 6, Times: 1, Spacing: 1, SliceGap: 2,
		Origin: [3]float64{-8, -8, -5}, StartSec: 9 * 3600, Date: "20260101",
		Value: func(_ string, i, j, k, _ int) int { return 100 + i + j + k }}.write(t)
	// Acquired second but numbered first: order must follow time.
	mrSpec{Dir: dir, SeriesUID: "2.25.105", Desc: "thermo B phase", FoR: testFoR, Number: 5,
		Cols: 8, Rows: 8, Slices: 3, Times: 4, Spacing: 2, SliceGap: 3,
		Origin: [3]float64{-8, -8, -3}, Components: []string{"P"}, StartSec: 10*3600 + 300, Date: "20260101",
		DT: 3, B0: 3, TE: 12.8, Signed12: true,
		Value: func(_ string, i, j, k, t int) int { return phaseS12(i, j, k, t) & 0x0FFF }}.write(t)
	mrSpec{Dir: dir, SeriesUID: "2.25.106", Desc: "thermo B magnitude", FoR: testFoR, Number: 6,
		Cols: 8, Rows: 8, Slices: 3, Times: 4, Spacing: 2, SliceGap: 3,
		Origin: [3]float64{-8, -8, -3}, Components: []string{"M"}, StartSec: 10*3600 + 300, Date: "20260101",
		DT: 3, B0: 3, TE: 12.8,
		Value: func(_ string, i, j, k, t int) int { return 1000 + t }}.write(t)
	mrSpec{Dir: dir, SeriesUID: "2.25.110", Desc: "thermo A", FoR: testFoR, Number: 10,
		Cols: 8, Rows: 8, Slices: 3, Times: 4, Spacing: 2, SliceGap: 3,
		Origin: [3]float64{-8, -8, -3}, Components: []string{"M", "P"}, StartSec: 10 * 3600, Date: "20260101",
		DT: 3, TPI: true, B0: 3, TE: 12.8,
		Value: func(c string, i, j, k, t int) int {
			if c == "M" {
				return 2000 + k
			}
			return phaseU16(i, j, k, t)
		}}.write(t)
	sq := func(z float64) [][3]float64 {
		return [][3]float64{{-3, -3, z}, {3, -3, z}, {3, 3, z}, {-3, 3, z}}
	}
	writeStructureSet(t, filepath.Join(dir, "plan", "rs"), testFoR, []roiSpec{
		{Number: 1, Name: "target", Type: "PTV", Contours: [][][3]float64{sq(-3), sq(0), sq(3)}},
		{Number: 2, Name: "nerve", Type: "AVOIDANCE", Contours: [][][3]float64{sq(6)}},
		{Number: 3, Name: "marker", Type: "MARKER", Points: 2},
	})
	// A truncated copy of one file and a file that is not DICOM.
	files, _ := filepath.Glob(filepath.Join(dir, "d*", "*"))
	data, err := os.ReadFile(files[0])
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "cut"), data[:len(data)/2], 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "notes"), []byte("sonication log, kept beside the images\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	return dir
}

func hasProblem(inv *Inventory, sub string) bool {
	for _, p := range inv.Problems {
		if strings.Contains(p, sub) {
			return true
		}
	}
	return false
}

func TestLoadSyntheticCase(t *testing.T) {
	dir := writeTestCase(t)
	before := snapshot(t, dir)
	c, inv, err := Load(t.Context(), dir, LoadOptions{Workers: 2}, nil)
	if err != nil {
		t.Fatal(err)
	}
	var txt bytes.Buffer
	inv.WriteText(&txt)
	t.Log(txt.String())
	if !inv.Reviewable {
		t.Fatalf("not reviewable: %s", inv.NotReviewable)
	}
	if after := snapshot(t, dir); after != before {
		t.Errorf("the case folder changed while being read")
	}
	roles := map[string]Role{}
	for _, s := range inv.Series {
		roles[s.UID] = s.Role
	}
	want := map[string]Role{"2.25.101": RoleAnatomy, "2.25.105": RolePhase, "2.25.106": RoleMagnitude, "2.25.110": RolePhaseMagnitude, "2.25.9900": RoleStructureSet}
	for uid, r := range want {
		if roles[uid] != r {
			t.Errorf("series %s: role %v, want %v", uid, roles[uid], r)
		}
	}
	// Skipped files with reasons.
	reasons := map[string]string{}
	for _, s := range inv.Skipped {
		reasons[s.Path] = s.Reason
	}
	if !strings.HasPrefix(reasons["cut"], "truncated") {
		t.Errorf("truncated file: reason %q", reasons["cut"])
	}
	if !strings.HasPrefix(reasons["notes"], "not a DICOM file") {
		t.Errorf("text file: reason %q", reasons["notes"])
	}
	if len(inv.Skipped) != 2 {
		t.Errorf("%d skipped files, want 2: %v", len(inv.Skipped), inv.Skipped)
	}
	if hasProblem(inv, "frame of reference") {
		t.Errorf("unexpected frame-of-reference problem: %v", inv.Problems)
	}
	// Anatomy: 16×16×6, slice spacing from positions (2 mm), not thickness.
	if c.Anatomy == nil || c.Anatomy.Slices != 6 || c.Anatomy.Spacing[2] != 2 {
		t.Fatalf("anatomy %+v", c.Anatomy)
	}
	if v := c.Anatomy.At(3, 4, 5); v != 100+3+4+5 {
		t.Errorf("anatomy voxel (3,4,5) = %g, want 112", v)
	}
	if len(c.Sonications) != 2 {
		t.Fatalf("%d sonications, want 2", len(c.Sonications))
	}
	a, b := c.Sonications[0], c.Sonications[1]
	if a.SeriesUID != "2.25.110" || b.SeriesUID != "2.25.105" || a.Number != 1 || b.Number != 2 {
		t.Fatalf("order: %s #%d, %s #%d; want 2.25.110 first (acquired first)", a.SeriesUID, a.Number, b.SeriesUID, b.Number)
	}
	for _, s := range []*dosemap.Sonication{a, b} {
		if s.Frames() != 4 || len(s.Magnitude) != 4 || s.Geometry.Slices != 3 {
			t.Fatalf("sonication %d: %d frames, %d magnitude, %d slices", s.Number, s.Frames(), len(s.Magnitude), s.Geometry.Slices)
		}
		// Frame times: 3 s apart (slices 10 ms apart within a frame; the
		// frame time is the earliest slice).
		for n, tm := range s.Times {
			if math.Abs(tm-3*float64(n)) > 1e-6 {
				t.Errorf("sonication %d: time %d = %g s, want %g", s.Number, n, tm, 3*float64(n))
			}
		}
		if s.B0 != 3 || math.Abs(s.TE-0.0128) > 1e-12 {
			t.Errorf("sonication %d: B0 %g T, TE %g s", s.Number, s.B0, s.TE)
		}
		if s.Geometry.Spacing != (dosemap.Vec3{2, 2, 3}) {
			t.Errorf("sonication %d spacing %v", s.Number, s.Geometry.Spacing)
		}
	}
	if got := b.Start.Sub(a.Start).Seconds(); math.Abs(got-300) > 1e-6 {
		t.Errorf("starts %v and %v: %g s apart, want 300", a.Start, b.Start, got)
	}
	// Phase scaling (unsigned: (v - 2^15)·π/2^15; signed 12-bit: v·π/2^11).
	for _, c := range [][4]int{{0, 0, 0, 0}, {7, 7, 2, 3}, {3, 5, 1, 2}} {
		i, j, k, tt := c[0], c[1], c[2], c[3]
		n := a.Geometry.Index(i, j, k)
		wantA := float64(phaseU16(i, j, k, tt)-32768) * math.Pi / 32768
		if got := float64(a.Phase[tt][n]); math.Abs(got-wantA) > 1e-6 {
			t.Errorf("phase A%v = %g, want %g", c, got, wantA)
		}
		wantB := float64(phaseS12(i, j, k, tt)) * math.Pi / 2048
		if got := float64(b.Phase[tt][n]); math.Abs(got-wantB) > 1e-6 {
			t.Errorf("phase B%v = %g, want %g", c, got, wantB)
		}
		if got := a.Magnitude[tt][n]; got != float32(2000+k) {
			t.Errorf("magnitude A%v = %g", c, got)
		}
		if got := b.Magnitude[tt][n]; got != float32(1000+tt) {
			t.Errorf("magnitude B%v = %g", c, got)
		}
	}
	// Structures.
	if len(c.Structures) != 3 {
		t.Fatalf("%d structures", len(c.Structures))
	}
	if tg := c.Target(); tg == nil || tg.Name != "target" || len(tg.Contours) != 3 {
		t.Errorf("target %+v", tg)
	}
	if c.Structures[1].Role != dosemap.RoleAvoid || c.Structures[2].Role != dosemap.RoleOther {
		t.Errorf("roles %v %v", c.Structures[1].Role, c.Structures[2].Role)
	}
	if inv.Structures[2].Ignored["POINT"] != 2 {
		t.Errorf("marker: ignored %v, want 2 POINT", inv.Structures[2].Ignored)
	}
	// JSON round trip of the inventory keeps the roles.
	js, err := json.Marshal(inv)
	if err != nil {
		t.Fatal(err)
	}
	var back Inventory
	if err := json.Unmarshal(js, &back); err != nil {
		t.Fatal(err)
	}
	if len(back.Series) != len(inv.Series) || back.Series[0].Role != inv.Series[0].Role || !back.Reviewable {
		t.Errorf("JSON round trip lost data")
	}
	// Scan sees the same series and sonications without pixels.
	inv2, err := Scan(t.Context(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(inv2.Sonications) != 2 || len(inv2.Series) != len(inv.Series) {
		t.Errorf("Scan: %d sonications, %d series", len(inv2.Sonications), len(inv2.Series))
	}
}

// snapshot lists names, sizes and times of everything under dir.
func snapshot(t *testing.T, dir string) string {
	var b strings.Builder
	filepath.Walk(dir, func(p string, fi os.FileInfo, err error) error {
		if err == nil {
			fmt.Fprintf(&b, "%s %d %v\n", p, fi.Size(), fi.ModTime().UnixNano())
		}
		return nil
	})
	return b.String()
}

func TestMidnightRollOver(t *testing.T) {
	dir := t.TempDir()
	// No dates at all: times of day only, crossing midnight inside the
	// series and between the two sonications.
	mrSpec{Dir: dir, SeriesUID: "2.25.201", Desc: "late", FoR: testFoR, Number: 1,
		Cols: 4, Rows: 4, Slices: 2, Times: 5, Spacing: 2, SliceGap: 3,
		Components: []string{"P"}, StartSec: 86400 - 7, DT: 3, B0: 1.5, TE: 20}.write(t)
	mrSpec{Dir: dir, SeriesUID: "2.25.202", Desc: "after midnight", FoR: testFoR, Number: 2,
		Cols: 4, Rows: 4, Slices: 2, Times: 3, Spacing: 2, SliceGap: 3,
		Components: []string{"P"}, StartSec: 120, DT: 3, B0: 1.5, TE: 20}.write(t)
	// Written in reverse number order: the later one has the lower number.
	mrSpec{Dir: dir, SeriesUID: "2.25.200", Desc: "evening", FoR: testFoR, Number: 3,
		Cols: 4, Rows: 4, Slices: 2, Times: 2, Spacing: 2, SliceGap: 3,
		Components: []string{"P"}, StartSec: 23 * 3600, DT: 3, B0: 1.5, TE: 20}.write(t)
	c, inv, err := Load(t.Context(), dir, LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	var order []string
	for _, s := range c.Sonications {
		order = append(order, s.SeriesUID)
	}
	if strings.Join(order, " ") != "2.25.200 2.25.201 2.25.202" {
		t.Errorf("order %v, want evening, late, after midnight", order)
	}
	late := c.Sonications[1]
	for n, tm := range late.Times {
		if math.Abs(tm-3*float64(n)) > 1e-6 {
			t.Errorf("late: time %d = %g, want %g (roll-over at midnight)", n, tm, 3*float64(n))
		}
	}
	if !late.Start.IsZero() {
		t.Errorf("undated series got a start date %v", late.Start)
	}
	if inv.Sonications[1].StartClock != "23:59:53.0" {
		t.Errorf("start clock %q", inv.Sonications[1].StartClock)
	}
}

func TestGeometryChecks(t *testing.T) {
	cases := []struct {
		name string
		spec mrSpec
		want string
	}{
		{"uneven", mrSpec{Slices: 3, Times: 2, SlicePos: func(k int) float64 { return []float64{0, 2, 5}[k] }}, "uneven slice spacing"},
		{"missing", mrSpec{Slices: 3, Times: 3, Skip: func(k, t int) bool { return k == 1 && t == 2 }}, "missing frames: 1 of 3×3"},
		{"no B0", mrSpec{Slices: 2, Times: 2, B0: -1}, "MagneticFieldStrength (0018,0087) missing"},
		{"no TE", mrSpec{Slices: 2, Times: 2, TE: -1}, "EchoTime (0018,0081) missing"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			s := tc.spec
			s.Dir, s.SeriesUID, s.Desc, s.FoR, s.Number = dir, "2.25.301", "thermo", testFoR, 1
			s.Cols, s.Rows, s.Spacing, s.SliceGap = 4, 4, 2, 3
			s.Components, s.StartSec, s.DT, s.TPI = []string{"P"}, 3600, 2, true
			if s.B0 == 0 {
				s.B0 = 3
			}
			if s.TE == 0 {
				s.TE = 10
			}
			s.write(t)
			c, inv, err := Load(t.Context(), dir, LoadOptions{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if !hasProblem(inv, tc.want) {
				t.Errorf("no problem %q in %q", tc.want, inv.Problems)
			}
			if !inv.Reviewable || len(c.Sonications) != 1 {
				t.Fatalf("case should still open: %v", inv.NotReviewable)
			}
			s0 := c.Sonications[0]
			if tc.name == "missing" {
				n := s0.Geometry.Index(0, 0, 1)
				if !math.IsNaN(float64(s0.Phase[2][n])) || math.IsNaN(float64(s0.Phase[1][n])) {
					t.Errorf("missing frame not NaN (or present frame NaN)")
				}
			}
			if tc.name == "no B0" && s0.B0 != 0 {
				t.Errorf("B0 %g, want 0 (missing)", s0.B0)
			}
		})
	}
	// Mixed orientations inside one series are planes acquired together:
	// two stacks of one sonication, not an unusable series.
	dir := t.TempDir()
	base := mrSpec{Dir: dir, SeriesUID: "2.25.401", Desc: "mixed", FoR: testFoR, Number: 1,
		Cols: 4, Rows: 4, Slices: 1, Times: 2, Spacing: 2, SliceGap: 3,
		Components: []string{"P"}, StartSec: 3600, DT: 2, TPI: true, B0: 3, TE: 10}
	base.write(t)
	base.IOP = [6]float64{1, 0, 0, 0, 0, -1}
	base.Dir = filepath.Join(dir, "other")
	base.write(t)
	c, inv, err := Load(t.Context(), dir, LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if hasProblem(inv, "mixed orientations in one series") || !inv.Reviewable || len(c.Sonications) != 1 || len(c.Sonications[0].Stacks) != 1 {
		t.Errorf("two orientations in one series: reviewable %v, %d sonications, problems %q", inv.Reviewable, len(c.Sonications), inv.Problems)
	}
}

func TestTemperatureAndDoseMaps(t *testing.T) {
	dir := t.TempDir()
	// Temperature: stored 370 + t*10 + i with slope 0.1 °C (units "Cel").
	mrSpec{Dir: dir, SeriesUID: "2.25.501", Desc: "temperature", FoR: testFoR, Number: 1,
		Cols: 4, Rows: 4, Slices: 2, Times: 3, Spacing: 2, SliceGap: 3, StartSec: 7200, DT: 4, TPI: true,
		RWV:   []*dicom.Element{rwvElement(t, 0.1, 0, "Cel", "TEMP")},
		Value: func(_ string, i, _, _, t int) int { return 370 + 10*t + i }}.write(t)
	// Dose: stored v, slope 0.5 min, LUTLabel CEM43.
	mrSpec{Dir: dir, SeriesUID: "2.25.502", Desc: "dose", FoR: testFoR, Number: 2,
		Cols: 4, Rows: 4, Slices: 2, Times: 1, Spacing: 2, SliceGap: 3, StartSec: 7300,
		RWV:   []*dicom.Element{rwvElement(t, 0.5, 0, "min", "CEM43")},
		Value: func(_ string, i, j, _, _ int) int { return 100*j + i }}.write(t)
	c, inv, err := Load(t.Context(), dir, LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Sonications) != 2 {
		t.Fatalf("%d sonications: %q", len(c.Sonications), inv.Problems)
	}
	tm, dose := c.Sonications[0], c.Sonications[1]
	if tm.Temperature == nil || len(tm.Temperature) != 3 || inv.Sonications[0].Kind != "temperature" {
		t.Fatalf("temperature sonication: %+v", inv.Sonications[0])
	}
	// 0.1 * (370 + 20 + 3) = 39.3 °C, float32 tolerance.
	if got := tm.Temperature[2][tm.Geometry.Index(3, 0, 1)]; math.Abs(float64(got)-39.3) > 1e-4 {
		t.Errorf("temperature = %g, want 39.3", got)
	}
	if dose.Dose == nil || inv.Sonications[1].Kind != "dose" {
		t.Fatalf("dose sonication: %+v", inv.Sonications[1])
	}
	if got := dose.Dose[dose.Geometry.Index(2, 3, 0)]; got != 151 {
		t.Errorf("dose = %g, want 0.5*302 = 151", got)
	}
}

// writeEnhanced writes one enhanced MR file holding slices × times phase
// frames described by per-frame functional groups.
func writeEnhanced(t testing.TB, path string, slices, times int) {
	var perFrame [][]*dicom.Element
	var raw []int
	const cols, rows = 4, 4
	for tt := 0; tt < times; tt++ {
		for k := 0; k < slices; k++ {
			sec := 3600 + 2*float64(tt)
			dt := fmt.Sprintf("20260102%02d%02d%09.6f", int(sec/3600), int(sec/60)%60, math.Mod(sec, 60))
			item := []*dicom.Element{
				el(t, tag.FrameContentSequence, [][]*dicom.Element{{
					el(t, tag.FrameAcquisitionDateTime, []string{dt}),
					el(t, tag.TemporalPositionIndex, []int{tt + 1}),
				}}),
				el(t, tag.PlanePositionSequence, [][]*dicom.Element{{
					el(t, tag.ImagePositionPatient, ds(0, 0, 3*float64(slices-1-k))), // reverse order on purpose
				}}),
				el(t, tag.MRImageFrameTypeSequence, [][]*dicom.Element{{
					el(t, tag.FrameType, []string{"ORIGINAL", "PRIMARY", "PHASE", "NONE"}),
					el(t, tag.ComplexImageComponent, []string{"PHASE"}),
				}}),
			}
			dicomwrite.SortByTag(item)
			perFrame = append(perFrame, item)
			for j := 0; j < rows; j++ {
				for i := 0; i < cols; i++ {
					raw = append(raw, phaseU16(i, j, slices-1-k, tt))
				}
			}
		}
	}
	shared := []*dicom.Element{
		el(t, tag.PixelMeasuresSequence, [][]*dicom.Element{{
			el(t, tag.PixelSpacing, ds(2, 2)),
			el(t, tag.SliceThickness, ds(3)),
		}}),
		el(t, tag.PlaneOrientationSequence, [][]*dicom.Element{{
			el(t, tag.ImageOrientationPatient, ds(1, 0, 0, 0, 1, 0)),
		}}),
	}
	dicomwrite.SortByTag(shared)
	els := []*dicom.Element{
		el(t, tag.ImageType, []string{"ORIGINAL", "PRIMARY", "PHASE", "NONE"}),
		el(t, tag.Modality, []string{"MR"}),
		el(t, tag.StudyInstanceUID, []string{"2.25.1000"}),
		el(t, tag.SeriesInstanceUID, []string{"2.25.601"}),
		el(t, tag.SeriesNumber, []string{"1"}),
		el(t, tag.FrameOfReferenceUID, []string{testFoR}),
		el(t, tag.MagneticFieldStrength, ds(3)),
		el(t, tag.SharedFunctionalGroupsSequence, [][]*dicom.Element{shared}),
		el(t, tag.PerFrameFunctionalGroupsSequence, perFrame),
		el(t, tag.NumberOfFrames, []string{strconv.Itoa(slices * times)}),
		el(t, tag.SamplesPerPixel, []int{1}),
		el(t, tag.PhotometricInterpretation, []string{"MONOCHROME2"}),
		el(t, tag.Rows, []int{rows}),
		el(t, tag.Columns, []int{cols}),
		el(t, tag.BitsAllocated, []int{16}),
		el(t, tag.BitsStored, []int{16}),
		el(t, tag.HighBit, []int{15}),
		el(t, tag.PixelRepresentation, []int{0}),
		pixelElement(t, pixelBytes(raw, false)),
	}
	writeDICOM(t, path, "1.2.840.10008.5.1.4.1.1.4.1", "2.25.601.1", false, els)
}

func TestEnhancedMultiFrame(t *testing.T) {
	dir := t.TempDir()
	writeEnhanced(t, filepath.Join(dir, "one"), 3, 4)
	c, inv, err := Load(t.Context(), dir, LoadOptions{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Sonications) != 1 {
		t.Fatalf("no sonication: %q %v", inv.Problems, inv.Skipped)
	}
	s := c.Sonications[0]
	if s.Frames() != 4 || s.Geometry.Slices != 3 || s.Geometry.Spacing[2] != 3 {
		t.Fatalf("%d frames, geometry %v", s.Frames(), s.Geometry)
	}
	if !hasProblem(inv, "EchoTime (0018,0081) missing") {
		t.Errorf("missing TE not reported: %q", inv.Problems)
	}
	for tt := 0; tt < 4; tt++ {
		if math.Abs(s.Times[tt]-2*float64(tt)) > 1e-6 {
			t.Errorf("time %d = %g", tt, s.Times[tt])
		}
		for k := 0; k < 3; k++ {
			want := float64(phaseU16(1, 2, k, tt)-32768) * math.Pi / 32768
			if got := float64(s.Phase[tt][s.Geometry.Index(1, 2, k)]); math.Abs(got-want) > 1e-6 {
				t.Errorf("phase t%d k%d = %g, want %g", tt, k, got, want)
			}
		}
	}
	if s.Start.Format("2006-01-02 15:04:05") != "2026-01-02 01:00:00" {
		t.Errorf("start %v", s.Start)
	}
}

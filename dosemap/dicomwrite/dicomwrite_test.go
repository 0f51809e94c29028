package dicomwrite

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"dosecover/dosemap"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// dsGrammar is the form of one DS value, DICOM PS3.5 section 6.2, Table
// 6.2-1: "A fixed point number shall contain only the characters 0-9 with
// an optional leading "+" or "-" and an optional "." to mark the decimal
// point. A floating point number shall be conveyed as defined in ANSI
// X3.9, with an "E" or "e" to indicate the start of the exponent";
// character repertoire "0"-"9", "+", "-", "E", "e", "." and space (our
// values carry no padding); at most 16 bytes.
var dsGrammar = regexp.MustCompile(`^[+-]?([0-9]+\.?[0-9]*|\.[0-9]+)([Ee][+-]?[0-9]+)?$`)

// checkDS reports what is wrong with s as the DS value of x: its length or
// form against PS3.5 6.2, or its value against x beyond relTol (relative).
func checkDS(s string, x, relTol float64) error {
	if len(s) > MaxDSLength {
		return fmt.Errorf("%q has %d characters, DS allows %d (PS3.5 6.2)", s, len(s), MaxDSLength)
	}
	if !dsGrammar.MatchString(s) {
		return fmt.Errorf("%q is not a DS value (PS3.5 6.2 character repertoire and form)", s)
	}
	got, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return fmt.Errorf("%q: %v", s, err)
	}
	if d := math.Abs(got - x); d > relTol*math.Abs(x) {
		return fmt.Errorf("%q reads back as %g, %g from %g (relative tolerance %g)", s, got, d, x, relTol)
	}
	return nil
}

func TestDS(t *testing.T) {
	// Worked examples; the expected strings are Go's %g forms with 10
	// significant digits (9 where a three-digit exponent needs the room),
	// checked by hand against the 16-character limit of PS3.5 6.2.
	cases := []struct {
		x    float64
		want string
		why  string
	}{
		{0, "0", "zero"},
		{-1, "-1", "integer, sign kept"},
		{0.1, "0.1", "shortest form that reads back, no trailing zeros"},
		{240 / 0.25, "960", "window centre of the dose map (240 CEM43 at 0.25 per unit)"},
		{1.0 / 3, "0.3333333333", "10 significant digits, 12 characters"},
		{-1.0 / 3, "-0.3333333333", "10 significant digits with sign, 13 characters"},
		{2.0 / 3 * 1e-7, "6.666666667e-08", "exponent form, 15 characters"},
		{-1.0 / 3 * 1e-100, "-3.33333333e-101", "three-digit exponent: 9 digits to stay within 16"},
		{-math.MaxFloat64, "-1.79769313e+308", "largest magnitude, exactly 16 characters"},
		{math.SmallestNonzeroFloat64, "4.940656458e-324", "smallest subnormal, exactly 16 characters"},
		{42.57747892 * 1.5, "63.86621838", "1H Larmor frequency at 1.5 T, MHz (γ/2π = 42.57747892 MHz/T, CODATA 2014, as dosemap.Gamma)"},
	}
	for _, c := range cases {
		got := DS(c.x)
		if got != c.want {
			t.Errorf("DS(%g) = %q, want %q (%s)", c.x, got, c.want, c.why)
		}
		// 9 significant digits at least: within 5e-9 relative.
		if err := checkDS(got, c.x, 5e-9); err != nil {
			t.Error(err)
		}
	}
}

// Every finite double, over the whole exponent range, gives a DS value of
// the allowed length and form that reads back within 9 significant digits
// (the fewest DS keeps: a sign, "d.dddddddd", "e-" and three exponent
// digits make 16 characters). Seeded draws of sign, mantissa and exponent.
func TestDSAllMagnitudes(t *testing.T) {
	r := rand.New(rand.NewPCG(2026, 12))
	for n := 0; n < 20000; n++ {
		x := math.Ldexp(1+r.Float64(), r.IntN(2*1020)-1020)
		if r.IntN(2) == 0 {
			x = -x
		}
		if err := checkDS(DS(x), x, 5e-9); err != nil {
			t.Fatal(err)
		}
	}
}

func TestDSList(t *testing.T) {
	got := DSList(0.5, -1.0/3, 0)
	want := []string{"0.5", "-0.3333333333", "0"}
	if strings.Join(got, `\`) != strings.Join(want, `\`) {
		t.Errorf("DSList = %q, want %q", got, want)
	}
	if len(DSList()) != 0 {
		t.Error("DSList of nothing is not empty")
	}
}

func TestJoinDS(t *testing.T) {
	cases := []struct {
		xs   []float64
		want string
	}{
		{nil, ""},
		{[]float64{0}, "0.000"},
		{[]float64{1.5, -2.25, 100}, `1.500\-2.250\100.000`},
		{[]float64{0.0004, 0.0006, -0.0004}, `0.000\0.001\-0.000`}, // rounded to 1 µm in mm
		{[]float64{-9999999999.9994}, "-9999999999.999"},           // largest magnitude JoinDS promises to fit
	}
	for _, c := range cases {
		got := JoinDS(c.xs)
		if got != c.want {
			t.Errorf("JoinDS(%v) = %q, want %q", c.xs, got, c.want)
		}
		if got == "" {
			continue
		}
		for n, v := range strings.Split(got, `\`) {
			if len(v) > MaxDSLength || !dsGrammar.MatchString(v) {
				t.Errorf("value %d %q is not a DS value (PS3.5 6.2)", n, v)
			}
			// Three decimals: within half a thousandth, plus the double's
			// own rounding at 1e10 (2e-6).
			if d := math.Abs(mustParse(t, v) - c.xs[n]); d > 0.0005+2e-6 {
				t.Errorf("value %d %q is %g from %g", n, v, d, c.xs[n])
			}
		}
	}
}

func mustParse(t *testing.T, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func TestContourData(t *testing.T) {
	pts := []dosemap.Vec3{{1, 2, 3}, {-4.5, 0.125, 1e3}}
	if got, want := ContourData(pts), `1.000\2.000\3.000\-4.500\0.125\1000.000`; got != want {
		t.Errorf("ContourData = %q, want %q (x, y, z of each point in turn, PS3.3 C.8.8.6)", got, want)
	}
	if got := ContourData(nil); got != "" {
		t.Errorf("ContourData(nil) = %q, want empty", got)
	}
}

func TestElements(t *testing.T) {
	var item Elements
	item.Add(tag.CodeMeaning, "minute")
	item.Add(tag.CodeValue, "min")
	var e Elements
	e.Add(tag.Rows, 4)
	e.Add(tag.RealWorldValueSlope, 0.25)
	e.AddVR(tag.RealWorldValueFirstValueMapped, "SS", []int{-2048})
	e.Seq(tag.MeasurementUnitsCodeSequence, item)
	e.Seq(tag.ConceptNameCodeSequence) // type 2: empty

	if v := e[0].Value.GetValue().([]int); len(v) != 1 || v[0] != 4 {
		t.Errorf("Rows = %v, want [4]", v)
	}
	if v := e[1].Value.GetValue().([]float64); len(v) != 1 || v[0] != 0.25 {
		t.Errorf("RealWorldValueSlope = %v, want [0.25]", v)
	}
	if vr := e[2].RawValueRepresentation; vr != "SS" {
		t.Errorf("AddVR: VR %q, want SS", vr)
	}
	if item[0].Tag != tag.CodeValue {
		t.Errorf("Seq left the item unsorted: first %v, want CodeValue (0008,0100)", item[0].Tag)
	}
	if n := len(e[4].Value.GetValue().([]*dicom.SequenceItemValue)); n != 0 {
		t.Errorf("empty sequence holds %d items", n)
	}

	// A value of the wrong Go type for the VR is refused when written.
	var wrong Elements
	wrong.Add(tag.Rows, "four")
	if _, err := Encode(Implementation{ClassUID: "2.25.1", VersionName: "TEST"}, "1.2.840.10008.5.1.4.1.1.4", "2.25.2", wrong); err == nil {
		t.Error("Encode wrote Rows (US) holding a string")
	}
	defer func() {
		if recover() == nil {
			t.Error("Add of a Go type the library cannot hold did not panic")
		}
	}()
	e.Add(tag.Rows, struct{}{})
}

// The written Image Plane attributes place every voxel where the grid
// does, by the equation of PS3.3 C.7.6.2.1.1: P = S + X·Δi·i + Y·Δj·j,
// with S ImagePositionPatient, X and Y the row and column cosines of
// ImageOrientationPatient, Δi the column spacing (PixelSpacing value 2)
// and Δj the row spacing (value 1). Tolerance 1e-6 mm: DS keeps 10
// significant digits of coordinates of at most a few hundred mm.
func TestAddImagePlane(t *testing.T) {
	c, s := math.Cos(0.3), math.Sin(0.3)
	oblique := dosemap.Geometry{
		Cols: 5, Rows: 3, Slices: 4,
		Spacing: dosemap.Vec3{0.9, 1.7, 2.5}, // unequal, so a swap of row and column spacing shows
		Origin:  dosemap.Vec3{-101.25, 37.5, 12},
		Row:     dosemap.Vec3{c, s, 0},
		Col:     dosemap.Vec3{0, 0, -1},
		Normal:  dosemap.Vec3{c, s, 0}.Cross(dosemap.Vec3{0, 0, -1}),
	}
	axial := dosemap.NewAxialGeometry(4, 6, 2, dosemap.Vec3{1.25, 0.75, 3.5}, dosemap.Vec3{-2, -3, 40})
	for _, g := range []dosemap.Geometry{oblique, axial} {
		for k := 0; k < g.Slices; k++ {
			var e Elements
			pos := e.AddImagePlane(g, k)
			vals := map[tag.Tag][]float64{}
			ints := map[tag.Tag]int{}
			for _, el := range e {
				switch v := el.Value.GetValue().(type) {
				case []string:
					for _, x := range v {
						vals[el.Tag] = append(vals[el.Tag], mustParse(t, x))
					}
				case []int:
					ints[el.Tag] = v[0]
				}
			}
			if ints[tag.Rows] != g.Rows || ints[tag.Columns] != g.Cols {
				t.Errorf("Rows, Columns = %d, %d, want %d, %d", ints[tag.Rows], ints[tag.Columns], g.Rows, g.Cols)
			}
			S, O, ps := vals[tag.ImagePositionPatient], vals[tag.ImageOrientationPatient], vals[tag.PixelSpacing]
			if len(S) != 3 || len(O) != 6 || len(ps) != 2 {
				t.Fatalf("IPP %v, IOP %v, PixelSpacing %v: wrong number of values", S, O, ps)
			}
			if d := pos.Sub(dosemap.Vec3{S[0], S[1], S[2]}).Norm(); d > 1e-6 {
				t.Errorf("returned position %v is %g mm from the written %v", pos, d, S)
			}
			for _, ij := range [][2]int{{0, 0}, {g.Cols - 1, 0}, {0, g.Rows - 1}, {g.Cols - 1, g.Rows - 1}, {2, 1}} {
				i, j := float64(ij[0]), float64(ij[1])
				var p dosemap.Vec3
				for a := 0; a < 3; a++ {
					p[a] = S[a] + O[a]*ps[1]*i + O[3+a]*ps[0]*j
				}
				if d := p.Sub(g.Point(i, j, float64(k))).Norm(); d > 1e-6 {
					t.Errorf("slice %d voxel (%d, %d): the written plane puts it at %v, the grid at %v (%g mm apart)", k, ij[0], ij[1], p, g.Point(i, j, float64(k)), d)
				}
			}
		}
	}
}

func TestSortByTag(t *testing.T) {
	var e Elements
	e.Add(tag.PatientName, "PHANTOM^GEL")
	e.Add(tag.Rows, 2)
	e.Add(tag.SOPInstanceUID, "1.2.3")
	e.Add(tag.Columns, 3)
	SortByTag(e)
	want := []tag.Tag{tag.SOPInstanceUID, tag.PatientName, tag.Rows, tag.Columns}
	for n, w := range want {
		if e[n].Tag != w {
			t.Errorf("position %d: %v, want %v (ascending group, then element: PS3.5 7.1)", n, e[n].Tag, w)
		}
	}
}

// A file written by Encode is read back by the DICOM library with its
// file meta information (PS3.10 7.1), values and pixel bytes unchanged.
func TestEncodeReadsBack(t *testing.T) {
	const sopClass, sop = "1.2.840.10008.5.1.4.1.1.4", "2.25.1234"
	im := Implementation{ClassUID: "2.25.5678", VersionName: "TEST_WRITER"}
	var body Elements
	body.Add(tag.Rows, 2)
	body.Add(tag.SOPInstanceUID, sop)
	body.Add(tag.ImagePositionPatient, DSList(-1.0/3, 0, 12.5))
	body.Add(tag.Columns, 2)
	body.Add(tag.BitsAllocated, 16)
	body.Add(tag.SamplesPerPixel, 1)
	body.Add(tag.SOPClassUID, sopClass)
	raw := []byte{1, 0, 2, 0, 3, 0, 0xff, 0xff}
	body = append(body, PixelData(raw))
	order := make([]tag.Tag, len(body))
	for n, el := range body {
		order[n] = el.Tag
	}
	data, err := Encode(im, sopClass, sop, body)
	if err != nil {
		t.Fatal(err)
	}
	for n, el := range body {
		if el.Tag != order[n] {
			t.Fatal("Encode reordered the caller's elements")
		}
	}
	ds, err := dicom.Parse(bytes.NewReader(data), int64(len(data)), nil, dicom.SkipPixelData())
	if err != nil {
		t.Fatalf("reading back: %v", err)
	}
	str := func(tg tag.Tag) string {
		el, err := ds.FindElementByTag(tg)
		if err != nil {
			t.Fatalf("%v: %v", tg, err)
		}
		return strings.Join(el.Value.GetValue().([]string), `\`)
	}
	for _, c := range []struct {
		tg   tag.Tag
		want string
	}{
		{tag.TransferSyntaxUID, ExplicitVRLittleEndian},
		{tag.MediaStorageSOPClassUID, sopClass},
		{tag.MediaStorageSOPInstanceUID, sop},
		{tag.ImplementationClassUID, im.ClassUID},
		{tag.ImplementationVersionName, im.VersionName},
		{tag.SOPInstanceUID, sop},
		{tag.ImagePositionPatient, `-0.3333333333\0\12.5`},
	} {
		if got := strings.TrimRight(str(c.tg), " \x00"); got != c.want {
			t.Errorf("%v = %q, want %q", c.tg, got, c.want)
		}
	}
	var prev tag.Tag
	for n, el := range ds.Elements {
		if n > 0 && el.Tag.Compare(prev) <= 0 {
			t.Errorf("%v follows %v: not in ascending tag order (PS3.5 7.1)", el.Tag, prev)
		}
		prev = el.Tag
	}
	// The pixel bytes stand unchanged at the end of the file (native
	// PixelData, OW, explicit VR little endian: tag, VR, 2 reserved
	// bytes, 4-byte length, then the value; PS3.5 7.1.2).
	if !bytes.HasSuffix(data, append([]byte{0xe0, 0x7f, 0x10, 0x00, 'O', 'W', 0, 0, byte(len(raw)), 0, 0, 0}, raw...)) {
		t.Error("PixelData is not written as the raw bytes given")
	}
}

// The library's cost of a long string list against one pre-joined value:
// JoinDS exists because the first grows quadratically with the points
// (500 to 2000 points, 2026-12-03: list 61 ms to 0.92 s, joined 0.12 to
// 0.28 ms).
func BenchmarkContourData(b *testing.B) {
	for _, points := range []int{500, 1000, 2000} {
		pts := make([]dosemap.Vec3, points)
		for n := range pts {
			a := 2 * math.Pi * float64(n) / float64(points)
			pts[n] = dosemap.Vec3{20 * math.Cos(a), 20 * math.Sin(a), 12.5}
		}
		xs := make([]float64, 0, 3*points)
		for _, p := range pts {
			xs = append(xs, p[0], p[1], p[2])
		}
		b.Run(fmt.Sprintf("joined/%d", points), func(b *testing.B) {
			for b.Loop() {
				encodeContour(b, ContourData(pts))
			}
		})
		b.Run(fmt.Sprintf("list/%d", points), func(b *testing.B) {
			list := make([]string, len(xs))
			for n, x := range xs {
				list[n] = strconv.FormatFloat(x, 'f', 3, 64)
			}
			for b.Loop() {
				encodeContour(b, list)
			}
		})
	}
}

func encodeContour(b *testing.B, v any) {
	var e Elements
	e.Add(tag.ContourData, v)
	if _, err := Encode(Implementation{ClassUID: "2.25.1", VersionName: "BENCH"}, "1.2.840.10008.5.1.4.1.1.481.3", "2.25.2", e); err != nil {
		b.Fatal(err)
	}
}

// The mapping item reads back with its values, the signed first value
// under VR SS included (PS3.3 C.7.6.16.2.11; the VR of the first and last
// values follows the pixels' sign).
func TestAddRealWorldValueMapping(t *testing.T) {
	var e Elements
	e.AddRealWorldValueMapping(RealWorldValueMapping{
		Label: "PHASE", Explanation: "phase in radians", VR: "SS", First: -2048, Last: 2047,
		Intercept: 0, Slope: math.Pi / 2048, UnitCode: "rad", UnitMeaning: "radian",
	})
	data, err := Encode(Implementation{ClassUID: "2.25.1", VersionName: "TEST"}, "1.2.840.10008.5.1.4.1.1.4", "2.25.2", e)
	if err != nil {
		t.Fatal(err)
	}
	ds, err := dicom.Parse(bytes.NewReader(data), int64(len(data)), nil)
	if err != nil {
		t.Fatal(err)
	}
	seq, err := ds.FindElementByTag(tag.RealWorldValueMappingSequence)
	if err != nil {
		t.Fatal(err)
	}
	items := seq.Value.GetValue().([]*dicom.SequenceItemValue)
	if len(items) != 1 {
		t.Fatalf("%d mapping items, want 1", len(items))
	}
	got := map[tag.Tag]any{}
	var unit []*dicom.Element
	for _, el := range items[0].GetValue().([]*dicom.Element) {
		got[el.Tag] = el.Value.GetValue()
		if el.Tag == tag.MeasurementUnitsCodeSequence {
			unit = el.Value.GetValue().([]*dicom.SequenceItemValue)[0].GetValue().([]*dicom.Element)
		}
		if el.Tag == tag.RealWorldValueFirstValueMapped && el.RawValueRepresentation != "SS" {
			t.Errorf("first value mapped written as %s, want SS", el.RawValueRepresentation)
		}
	}
	if v := got[tag.RealWorldValueFirstValueMapped].([]int); v[0] != -2048 {
		t.Errorf("first value mapped %v, want -2048", v)
	}
	if v := got[tag.RealWorldValueSlope].([]float64); v[0] != math.Pi/2048 {
		t.Errorf("slope %v, want π/2048 exactly (FD)", v)
	}
	if v := got[tag.LUTLabel].([]string); v[0] != "PHASE" {
		t.Errorf("LUTLabel %q", v)
	}
	codes := map[tag.Tag]string{}
	for _, el := range unit {
		codes[el.Tag] = strings.TrimSpace(el.Value.GetValue().([]string)[0])
	}
	if codes[tag.CodeValue] != "rad" || codes[tag.CodingSchemeDesignator] != "UCUM" || codes[tag.CodeMeaning] != "radian" {
		t.Errorf("unit code %v, want rad (UCUM) radian", codes)
	}
}

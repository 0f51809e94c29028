// Package dicomwrite builds DICOM data sets with
// github.com/suyashkumar/dicom and encodes them as Part 10 files: the one
// home of the element builders that the simulator (dosemap/sim) and the
// result objects (review/dicomout) share.
//
// Values follow the value representations of DICOM PS3.5 section 6.2; data
// sets are written in ascending tag order (PS3.5 section 7.1) with explicit
// VR little endian transfer syntax and file meta information (PS3.10
// section 7.1).
package dicomwrite

import (
	"bytes"
	"fmt"
	"sort"
	"strconv"
	"strings"

	"dosecover/dosemap"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// ExplicitVRLittleEndian is the transfer syntax Encode writes (PS3.5
// section 10.1, Annex A.2).
const ExplicitVRLittleEndian = "1.2.840.10008.1.2.1"

// MaxDSLength is the longest value of VR DS, in characters (PS3.5 section
// 6.2, Table 6.2-1).
const MaxDSLength = 16

// Elements collects the elements of one data set or sequence item in the
// order they are added; Seq and Encode sort them by tag.
type Elements []*dicom.Element

// Add appends the element of tag t with value v. A single string, int or
// float64 is taken as a one-valued list; any other v is passed to
// dicom.NewElement as it is ([]string, []int, []float64, []byte,
// [][]*dicom.Element, dicom.PixelDataInfo). A Go type the library cannot
// hold, or a tag missing from its dictionary, is a programmer error and
// panics; a value that does not suit the tag's value representation is
// refused when the data set is written (Encode returns the error).
func (e *Elements) Add(t tag.Tag, v any) {
	switch x := v.(type) {
	case string:
		v = []string{x}
	case int:
		v = []int{x}
	case float64:
		v = []float64{x}
	}
	el, err := dicom.NewElement(t, v)
	if err != nil {
		panic(fmt.Sprintf("dicomwrite: element %v: %v", t, err)) // programmer error: wrong Go type for the VR
	}
	*e = append(*e, el)
}

// AddVR appends an element whose tag allows several value representations
// (such as US or SS for the pixel-value attributes of PS3.6), with the VR
// vr given.
func (e *Elements) AddVR(t tag.Tag, vr string, v any) {
	e.Add(t, v)
	(*e)[len(*e)-1].RawValueRepresentation = vr
}

// Seq appends the sequence of tag t holding items, each item sorted by
// tag; with no items the sequence is empty (a type 2 sequence).
func (e *Elements) Seq(t tag.Tag, items ...Elements) {
	v := make([][]*dicom.Element, len(items))
	for n, it := range items {
		SortByTag(it)
		v[n] = it
	}
	e.Add(t, v)
}

// SortByTag sorts es in ascending tag order (group, then element), as a
// data set's elements are encoded (PS3.5 section 7.1); elements with the
// same tag keep their order.
func SortByTag(es []*dicom.Element) {
	sort.SliceStable(es, func(a, b int) bool {
		if es[a].Tag.Group != es[b].Tag.Group {
			return es[a].Tag.Group < es[b].Tag.Group
		}
		return es[a].Tag.Element < es[b].Tag.Element
	})
}

// DS formats x as a decimal string (VR DS, PS3.5 section 6.2): the
// shortest of Go's %g forms with at most 10 significant digits that fits
// MaxDSLength characters, so a finite x keeps 10 significant digits unless
// a long exponent leaves room for fewer. x must be finite: DS has no form
// for NaN or infinities.
func DS(x float64) string {
	for prec := 10; prec > 0; prec-- {
		s := strconv.FormatFloat(x, 'g', prec, 64)
		if len(s) <= MaxDSLength {
			return s
		}
	}
	return "0"
}

// DSList formats each of xs with DS, for a multi-valued DS attribute of a
// few values (ImagePositionPatient, PixelSpacing).
func DSList(xs ...float64) []string {
	out := make([]string, len(xs))
	for n, x := range xs {
		out[n] = DS(x)
	}
	return out
}

// JoinDS formats xs with three decimals (1 µm for coordinates in mm) and
// joins them into one backslash-separated DS value, for long lists such
// as ContourData: the DICOM library joins a list of strings in quadratic
// time, one pre-joined string in linear time. Each value fits MaxDSLength
// characters while its magnitude is below 1e10 (10 km in mm).
func JoinDS(xs []float64) string {
	var sb strings.Builder
	sb.Grow(12 * len(xs))
	for n, x := range xs {
		if n > 0 {
			sb.WriteByte('\\')
		}
		sb.WriteString(strconv.FormatFloat(x, 'f', 3, 64))
	}
	return sb.String()
}

// ContourData returns the points of a contour as the value of ContourData
// (3006,0050): x, y, z of each point in turn (PS3.3 C.8.8.6), joined by
// JoinDS.
func ContourData(points []dosemap.Vec3) string {
	xs := make([]float64, 0, 3*len(points))
	for _, p := range points {
		xs = append(xs, p[0], p[1], p[2])
	}
	return JoinDS(xs)
}

// AddImagePlane adds the attributes that place slice k of the grid g in
// patient coordinates (LPS, mm) and returns the slice's position:
// ImagePositionPatient, the centre of the slice's first voxel;
// ImageOrientationPatient, the row then the column direction cosines;
// PixelSpacing, the spacing between rows (g.Spacing[1]) then between
// columns (g.Spacing[0]) (Image Plane module, PS3.3 C.7.6.2.1.1); and Rows
// and Columns (Image Pixel module, PS3.3 C.7.6.3).
func (e *Elements) AddImagePlane(g dosemap.Geometry, k int) dosemap.Vec3 {
	ipp := g.Point(0, 0, float64(k))
	e.Add(tag.ImagePositionPatient, DSList(ipp[0], ipp[1], ipp[2]))
	e.Add(tag.ImageOrientationPatient, DSList(g.Row[0], g.Row[1], g.Row[2], g.Col[0], g.Col[1], g.Col[2]))
	e.Add(tag.PixelSpacing, DSList(g.Spacing[1], g.Spacing[0]))
	e.Add(tag.Rows, g.Rows)
	e.Add(tag.Columns, g.Cols)
	return ipp
}

// RealWorldValueMapping is one item of RealWorldValueMappingSequence
// (0040,9096), PS3.3 C.7.6.16.2.11: the stored values First to Last stand
// for Intercept + Slope × stored value, in the UCUM unit UnitCode.
type RealWorldValueMapping struct {
	Label       string  // LUTLabel (0040,9210)
	Explanation string  // LUTExplanation (0028,3003)
	VR          string  // "US" or "SS": of First and Last, as the pixels are unsigned or signed
	First, Last int     // RealWorldValueFirstValueMapped, ...LastValueMapped
	Intercept   float64 // RealWorldValueIntercept (0040,9224)
	Slope       float64 // RealWorldValueSlope (0040,9225)
	UnitCode    string  // MeasurementUnitsCodeSequence: UCUM code value ("min", "rad")
	UnitMeaning string  // and its code meaning ("minute", "radian")
}

// AddRealWorldValueMapping adds RealWorldValueMappingSequence holding the
// one mapping m.
func (e *Elements) AddRealWorldValueMapping(m RealWorldValueMapping) {
	var code Elements
	code.Add(tag.CodeValue, m.UnitCode)
	code.Add(tag.CodingSchemeDesignator, "UCUM")
	code.Add(tag.CodeMeaning, m.UnitMeaning)
	var it Elements
	it.Add(tag.LUTExplanation, m.Explanation)
	it.AddVR(tag.RealWorldValueFirstValueMapped, m.VR, []int{m.First})
	it.AddVR(tag.RealWorldValueLastValueMapped, m.VR, []int{m.Last})
	it.Add(tag.RealWorldValueIntercept, m.Intercept)
	it.Add(tag.RealWorldValueSlope, m.Slope)
	it.Add(tag.LUTLabel, m.Label)
	it.Seq(tag.MeasurementUnitsCodeSequence, code)
	e.Seq(tag.RealWorldValueMappingSequence, it)
}

// PixelData returns a PixelData element holding raw, the native (not
// encapsulated) pixel bytes as they are to be written; the writer copies
// them unchanged.
func PixelData(raw []byte) *dicom.Element {
	el, err := dicom.NewElement(tag.PixelData, dicom.PixelDataInfo{IntentionallyUnprocessed: true, UnprocessedValueData: raw})
	if err != nil {
		panic(fmt.Sprintf("dicomwrite: pixel data: %v", err)) // programmer error
	}
	return el
}

// Implementation names the program that writes a file, in its file meta
// information (PS3.10 section 7.1; PS3.7 Annex D.3.3.2).
type Implementation struct {
	ClassUID    string // ImplementationClassUID (0002,0012)
	VersionName string // ImplementationVersionName (0002,0013), at most 16 characters
}

// Encode returns the bytes of a DICOM Part 10 file in explicit VR little
// endian holding body, with the file meta information (PS3.10 section
// 7.1) of the SOP instance sopInstance of class sopClass written by im.
// body is not changed; the file's elements are sorted by tag.
func Encode(im Implementation, sopClass, sopInstance string, body []*dicom.Element) ([]byte, error) {
	var all Elements
	all.Add(tag.FileMetaInformationVersion, []byte{0, 1})
	all.Add(tag.MediaStorageSOPClassUID, sopClass)
	all.Add(tag.MediaStorageSOPInstanceUID, sopInstance)
	all.Add(tag.TransferSyntaxUID, ExplicitVRLittleEndian)
	all.Add(tag.ImplementationClassUID, im.ClassUID)
	all.Add(tag.ImplementationVersionName, im.VersionName)
	all = append(all, body...)
	SortByTag(all)
	var buf bytes.Buffer
	if err := dicom.Write(&buf, dicom.Dataset{Elements: all}); err != nil {
		return nil, fmt.Errorf("encoding %s: %w", sopInstance, err)
	}
	return buf.Bytes(), nil
}

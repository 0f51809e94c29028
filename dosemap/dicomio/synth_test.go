package dicomio

import (
	"encoding/binary"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"dosecover/dosemap/dicomwrite"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// Synthetic DICOM files for the tests, written with the DICOM library's own
// writer from standard attributes only.

func el(t testing.TB, tg tag.Tag, v any) *dicom.Element {
	t.Helper()
	e, err := dicom.NewElement(tg, v)
	if err != nil {
		t.Fatalf("element %v: %v", tg, err)
	}
	return e
}

func ds(vs ...float64) []string {
	out := make([]string, len(vs))
	for n, v := range vs {
		out[n] = strconv.FormatFloat(v, 'f', -1, 64)
	}
	return out
}

// writeDICOM writes els (plus file meta) to path in explicit VR little
// endian, or big endian when big is true.
func writeDICOM(t testing.TB, path string, sopClass, sopInstance string, big bool, els []*dicom.Element) {
	t.Helper()
	syntax := "1.2.840.10008.1.2.1"
	if big {
		syntax = "1.2.840.10008.1.2.2"
	}
	all := []*dicom.Element{
		el(t, tag.MediaStorageSOPClassUID, []string{sopClass}),
		el(t, tag.MediaStorageSOPInstanceUID, []string{sopInstance}),
		el(t, tag.TransferSyntaxUID, []string{syntax}),
		el(t, tag.SOPClassUID, []string{sopClass}),
		el(t, tag.SOPInstanceUID, []string{sopInstance}),
	}
	all = append(all, els...)
	dicomwrite.SortByTag(all)
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := dicom.Write(f, dicom.Dataset{Elements: all}); err != nil {
		t.Fatalf("writing %s: %v", path, err)
	}
}

// pixelBytes packs 16-bit stored values in the given byte order.
func pixelBytes(vals []int, big bool) []byte {
	out := make([]byte, 2*len(vals))
	for n, v := range vals {
		if big {
			binary.BigEndian.PutUint16(out[2*n:], uint16(v))
		} else {
			binary.LittleEndian.PutUint16(out[2*n:], uint16(v))
		}
	}
	return out
}

func pixelElement(t testing.TB, raw []byte) *dicom.Element {
	return el(t, tag.PixelData, dicom.PixelDataInfo{IntentionallyUnprocessed: true, UnprocessedValueData: raw})
}

// mrSpec describes a synthetic MR series of single-frame files.
type mrSpec struct {
	Dir, SeriesUID, Desc, FoR string
	Number                    int
	Cols, Rows, Slices, Times int
	Spacing, SliceGap         float64
	Origin                    [3]float64
	IOP                       [6]float64
	Components                []string // ImageType value 3 per written copy: "P", "M", or "" for anatomy
	StartSec                  float64  // seconds after midnight of the first frame
	Date                      string   // AcquisitionDate; "" none
	DT                        float64  // seconds between time points
	TPI                       bool     // write TemporalPositionIdentifier
	B0, TE                    float64  // T, ms; 0 omitted
	Signed12                  bool     // PixelRepresentation 1, BitsStored 12
	Big                       bool
	Value                     func(c string, i, j, k, t int) int // stored value
	Skip                      func(k, t int) bool                // frames not written
	SlicePos                  func(k int) float64                // position along z; nil: k*SliceGap
	RWV                       []*dicom.Element
	First                     int // instance numbers (and file names) start after this
}

// write writes the series; file names are deliberately uninformative.
func (s mrSpec) write(t testing.TB) {
	t.Helper()
	if s.IOP == ([6]float64{}) {
		s.IOP = [6]float64{1, 0, 0, 0, 1, 0}
	}
	if len(s.Components) == 0 {
		s.Components = []string{""}
	}
	n := s.First
	for tt := 0; tt < s.Times; tt++ {
		for k := 0; k < s.Slices; k++ {
			if s.Skip != nil && s.Skip(k, tt) {
				continue
			}
			for _, c := range s.Components {
				n++
				z := float64(k) * s.SliceGap
				if s.SlicePos != nil {
					z = s.SlicePos(k)
				}
				row := [3]float64{s.IOP[0], s.IOP[1], s.IOP[2]}
				col := [3]float64{s.IOP[3], s.IOP[4], s.IOP[5]}
				nrm := [3]float64{row[1]*col[2] - row[2]*col[1], row[2]*col[0] - row[0]*col[2], row[0]*col[1] - row[1]*col[0]}
				ipp := ds(s.Origin[0]+z*nrm[0], s.Origin[1]+z*nrm[1], s.Origin[2]+z*nrm[2])
				sec := s.StartSec + float64(tt)*s.DT + 0.01*float64(k)
				for sec >= 86400 {
					sec -= 86400
				}
				hh, mm := int(sec/3600), int(sec/60)%60
				ss := sec - float64(hh*3600+mm*60)
				tm := fmt.Sprintf("%02d%02d%09.6f", hh, mm, ss)
				itype := []string{"ORIGINAL", "PRIMARY", "M", "ND"}
				if c != "" {
					itype[2] = c
				}
				vals := make([]int, s.Cols*s.Rows)
				for j := 0; j < s.Rows; j++ {
					for i := 0; i < s.Cols; i++ {
						if s.Value != nil {
							vals[j*s.Cols+i] = s.Value(c, i, j, k, tt)
						}
					}
				}
				bits, rep := 16, 0
				if s.Signed12 {
					bits, rep = 12, 1
				}
				els := []*dicom.Element{
					el(t, tag.ImageType, itype),
					el(t, tag.Modality, []string{"MR"}),
					el(t, tag.StudyInstanceUID, []string{"2.25.1000"}),
					el(t, tag.SeriesInstanceUID, []string{s.SeriesUID}),
					el(t, tag.SeriesNumber, []string{strconv.Itoa(s.Number)}),
					el(t, tag.SeriesDescription, []string{s.Desc}),
					el(t, tag.FrameOfReferenceUID, []string{s.FoR}),
					el(t, tag.InstanceNumber, []string{strconv.Itoa(n)}),
					el(t, tag.AcquisitionTime, []string{tm}),
					el(t, tag.ImagePositionPatient, ipp),
					el(t, tag.ImageOrientationPatient, ds(s.IOP[:]...)),
					el(t, tag.PixelSpacing, ds(s.Spacing, s.Spacing)),
					el(t, tag.SliceThickness, ds(s.SliceGap)),
					el(t, tag.SamplesPerPixel, []int{1}),
					el(t, tag.PhotometricInterpretation, []string{"MONOCHROME2"}),
					el(t, tag.Rows, []int{s.Rows}),
					el(t, tag.Columns, []int{s.Cols}),
					el(t, tag.BitsAllocated, []int{16}),
					el(t, tag.BitsStored, []int{bits}),
					el(t, tag.HighBit, []int{bits - 1}),
					el(t, tag.PixelRepresentation, []int{rep}),
					pixelElement(t, pixelBytes(vals, s.Big)),
				}
				if s.Date != "" {
					els = append(els, el(t, tag.AcquisitionDate, []string{s.Date}))
				}
				if s.TPI {
					els = append(els, el(t, tag.TemporalPositionIdentifier, []string{strconv.Itoa(tt + 1)}))
				}
				if s.B0 > 0 {
					els = append(els, el(t, tag.MagneticFieldStrength, ds(s.B0)))
				}
				if s.TE > 0 {
					els = append(els, el(t, tag.EchoTime, ds(s.TE)))
				}
				els = append(els, s.RWV...)
				uid := fmt.Sprintf("%s.%d", s.SeriesUID, n)
				// Scatter files over sub-folders with meaningless names.
				p := filepath.Join(s.Dir, fmt.Sprintf("d%d", (n*7)%3), fmt.Sprintf("x%s_%06d", s.SeriesUID[len(s.SeriesUID)-2:], (n*37)%100003))
				writeDICOM(t, p, "1.2.840.10008.5.1.4.1.1.4", uid, s.Big, els)
			}
		}
	}
}

// rwvElement returns a Real World Value Mapping Sequence with one item.
func rwvElement(t testing.TB, slope, intercept float64, units, label string) *dicom.Element {
	item := []*dicom.Element{
		el(t, tag.LUTLabel, []string{label}),
		el(t, tag.MeasurementUnitsCodeSequence, [][]*dicom.Element{{
			el(t, tag.CodeValue, []string{units}),
			el(t, tag.CodingSchemeDesignator, []string{"UCUM"}),
			el(t, tag.CodeMeaning, []string{units}),
		}}),
		el(t, tag.RealWorldValueIntercept, []float64{intercept}),
		el(t, tag.RealWorldValueSlope, []float64{slope}),
		el(t, tag.RealWorldValueFirstValueMapped, []int{0}),
		el(t, tag.RealWorldValueLastValueMapped, []int{65535}),
	}
	dicomwrite.SortByTag(item)
	return el(t, tag.RealWorldValueMappingSequence, [][]*dicom.Element{item})
}

// writeStructureSet writes an RTSTRUCT with the given ROIs; each ROI has
// closed planar contours given as point lists.
type roiSpec struct {
	Number   int
	Name     string
	Type     string
	Contours [][][3]float64
	Points   int // POINT contours to add
}

func writeStructureSet(t testing.TB, path, forUID string, rois []roiSpec) {
	var ssroi, obs, contours [][]*dicom.Element
	for _, r := range rois {
		ssroi = append(ssroi, []*dicom.Element{
			el(t, tag.ROINumber, []string{strconv.Itoa(r.Number)}),
			el(t, tag.ReferencedFrameOfReferenceUID, []string{forUID}),
			el(t, tag.ROIName, []string{r.Name}),
		})
		obs = append(obs, []*dicom.Element{
			el(t, tag.ObservationNumber, []string{strconv.Itoa(r.Number)}),
			el(t, tag.ReferencedROINumber, []string{strconv.Itoa(r.Number)}),
			el(t, tag.RTROIInterpretedType, []string{r.Type}),
		})
		var cs [][]*dicom.Element
		add := func(typ string, pts [][3]float64) {
			var flat []float64
			for _, p := range pts {
				flat = append(flat, p[0], p[1], p[2])
			}
			cs = append(cs, []*dicom.Element{
				el(t, tag.ContourGeometricType, []string{typ}),
				el(t, tag.NumberOfContourPoints, []string{strconv.Itoa(len(pts))}),
				el(t, tag.ContourData, ds(flat...)),
			})
		}
		for _, c := range r.Contours {
			add("CLOSED_PLANAR", c)
		}
		for p := 0; p < r.Points; p++ {
			add("POINT", [][3]float64{{0, 0, 0}})
		}
		contours = append(contours, []*dicom.Element{
			el(t, tag.ContourSequence, cs),
			el(t, tag.ReferencedROINumber, []string{strconv.Itoa(r.Number)}),
		})
	}
	els := []*dicom.Element{
		el(t, tag.Modality, []string{"RTSTRUCT"}),
		el(t, tag.StudyInstanceUID, []string{"2.25.1000"}),
		el(t, tag.SeriesInstanceUID, []string{"2.25.9900"}),
		el(t, tag.SeriesNumber, []string{"99"}),
		el(t, tag.StructureSetLabel, []string{"plan"}),
		el(t, tag.StructureSetROISequence, ssroi),
		el(t, tag.ROIContourSequence, contours),
		el(t, tag.RTROIObservationsSequence, obs),
	}
	writeDICOM(t, path, sopRTStructureSet, "2.25.9900.1", false, els)
}

package dicomout

import (
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/dicomwrite"
	"dosecover/review"
	"dosecover/review/view"

	"github.com/suyashkumar/dicom/pkg/tag"
)

// Caution is carried by the dose map (ImageComments) and the structure set
// (StructureSetDescription); the report carries it on its page.
const Caution = "dosecover result for retrospective review, QA and teaching; not a planning or treatment system; thresholds vary by tissue; defer to local protocols and licensed practice"

// Series numbers of the results (high, so they sort after the source).
const (
	SeriesNumberReport     = 9801
	SeriesNumberDose       = 9802
	SeriesNumberStructures = 9803
)

// ReportPDF returns the report as an Encapsulated PDF (PS3.3 A.45.1):
// Patient, General Study, Encapsulated Document Series, General
// Equipment, SC Equipment, Encapsulated Document and SOP Common modules.
func ReportPDF(s *Source, pdf []byte, title string, now time.Time) (Object, error) {
	if len(pdf) < 5 || string(pdf[:5]) != "%PDF-" {
		return Object{}, fmt.Errorf("encapsulated report: the document is not a PDF")
	}
	sop, series := NewUID(), NewUID()
	var e elems
	s.common(&e, SOPClassEncapsulatedPDF, sop, series, SeriesNumberReport, "DOC", "Thermal dose coverage report", now)
	e.Add(tag.ConversionType, "WSD") // workstation (PS3.3 C.8.6.1)
	e.Add(tag.InstanceNumber, "1")
	e.Add(tag.ContentDate, now.Format("20060102"))
	e.Add(tag.ContentTime, now.Format("150405"))
	e.Add(tag.AcquisitionDateTime, now.Format("20060102150405"))
	e.Add(tag.BurnedInAnnotation, "YES")
	e.Add(tag.DocumentTitle, title)
	e.Seq(tag.ConceptNameCodeSequence) // type 2: empty
	e.Add(tag.MIMETypeOfEncapsulatedDocument, "application/pdf")
	doc := pdf
	if len(doc)%2 == 1 {
		doc = append(doc[:len(doc):len(doc)], 0) // OB values have even length (PS3.5 7.1.1)
	}
	e.Add(tag.EncapsulatedDocument, doc)
	e.Add(tag.Tag{Group: 0x0042, Element: 0x0015}, []int{len(pdf)}) // EncapsulatedDocumentLength (UL)
	data, err := encode(SOPClassEncapsulatedPDF, sop, e)
	if err != nil {
		return Object{}, err
	}
	return Object{Name: "report-" + sop + ".dcm", Data: data}, nil
}

// DoseSlope is the CEM43 minutes of one stored unit of the dose map: 240
// CEM43 is stored exactly (960), and the largest stored value, 65535,
// stands for DoseCeiling.
const DoseSlope = 0.25

// DoseCeiling is the largest dose the map holds (CEM43 minutes); a larger
// dose is stored as the ceiling, lethal under any common threshold.
const DoseCeiling = DoseSlope * 65535

// DoseMap returns the cumulative thermal dose of r (CEM43 minutes, on the
// grid where it was computed) as one derived MR image per slice with a
// Real World Value Mapping labelled "CEM43" (slope DoseSlope, unit UCUM
// "min"), the form dosemap/dicomio reads as a dose map; ImageType value 4
// dicomio.CumulativeDoseImageType keeps it from being added to the
// thermometry it sums when it is read beside it. Unmeasured voxels
// (NaN) are stored as 0. A model other than CEM43 is refused.
func DoseMap(s *Source, r *review.Result, now time.Time) ([]Object, error) {
	if r.Dose == nil {
		return nil, fmt.Errorf("dose map: the analysis holds no cumulative dose")
	}
	if r.Model != "cem43" {
		return nil, fmt.Errorf("dose map: the %s model's dose is not in CEM43; only CEM43 maps are written", r.Model)
	}
	g := r.Dose.Geometry
	series := NewUID()
	var out []Object
	px := make([]byte, 2*g.SliceLen())
	for k := 0; k < g.Slices; k++ {
		sop := NewUID()
		var e elems
		s.common(&e, SOPClassMRImage, sop, series, SeriesNumberDose, "MR", "Cumulative thermal dose (CEM43)", now)
		e.Add(tag.ImageType, []string{"DERIVED", "SECONDARY", "OTHER", dicomio.CumulativeDoseImageType})
		e.Add(tag.ContentDate, now.Format("20060102"))
		e.Add(tag.ContentTime, now.Format("150405"))
		e.Add(tag.AcquisitionDate, now.Format("20060102"))
		e.Add(tag.AcquisitionTime, now.Format("150405"))
		e.Add(tag.DerivationDescription, "cumulative thermal dose (Sapareto-Dewey CEM43) computed by dosecover from the MR thermometry of the study")
		e.Add(tag.Laterality, "")
		e.Add(tag.ImageComments, Caution)
		e.Add(tag.ScanningSequence, "RM") // research mode: no acquisition of its own
		e.Add(tag.SequenceVariant, "NONE")
		e.Add(tag.ScanOptions, "")
		e.Add(tag.MRAcquisitionType, "")
		e.Add(tag.SliceThickness, ds(g.Spacing[2]))
		e.Add(tag.RepetitionTime, "")
		e.Add(tag.EchoTime, "")
		e.Add(tag.EchoTrainLength, "")
		e.Add(tag.SpacingBetweenSlices, ds(g.Spacing[2]))
		e.Add(tag.PatientPosition, "")
		e.Add(tag.InstanceNumber, strconv.Itoa(k+1))
		e.Add(tag.AcquisitionNumber, "1")
		e.AddImagePlane(g, k)
		e.Add(tag.FrameOfReferenceUID, s.FrameOfReference)
		e.Add(tag.PositionReferenceIndicator, "")
		e.Add(tag.SamplesPerPixel, 1)
		e.Add(tag.PhotometricInterpretation, "MONOCHROME2")
		e.Add(tag.BitsAllocated, 16)
		e.Add(tag.BitsStored, 16)
		e.Add(tag.HighBit, 15)
		e.Add(tag.PixelRepresentation, 0)
		e.Add(tag.WindowCenter, ds(240/DoseSlope))
		e.Add(tag.WindowWidth, ds(480/DoseSlope))
		e.AddRealWorldValueMapping(dicomwrite.RealWorldValueMapping{
			Label: "CEM43", Explanation: "cumulative equivalent minutes at 43 degC",
			VR: "US", First: 0, Last: 65535, Intercept: 0, Slope: DoseSlope,
			UnitCode: "min", UnitMeaning: "minute",
		})
		sl := g.SliceLen()
		for n, v := range r.Dose.Data[k*sl : (k+1)*sl] {
			binary.LittleEndian.PutUint16(px[2*n:], storedDose(v))
		}
		buf := append([]byte(nil), px...)
		e = append(e, dicomwrite.PixelData(buf))
		data, err := encode(SOPClassMRImage, sop, e)
		if err != nil {
			return nil, err
		}
		out = append(out, Object{Name: fmt.Sprintf("dose-%03d-%s.dcm", k+1, sop), Data: data})
	}
	return out, nil
}

// storedDose is the stored value of dose d: round(d/DoseSlope), within
// [0, 65535]; NaN (unmeasured) is 0.
func storedDose(d float32) uint16 {
	x := float64(d)
	switch {
	case math.IsNaN(x) || x <= 0:
		return 0
	case x >= DoseCeiling:
		return 65535
	}
	return uint16(math.Round(x / DoseSlope))
}

// Structures returns an RT Structure Set (PS3.3 A.19) with the target as
// read from the case (named "NAME (as reviewed)", interpreted type
// CONTROL, so that it is never taken for the plan's target), and the lethal region and the holes of r traced on
// the slices of the analysis grid (marching squares on each slice of the
// mask at 0.5, closed polygons; islands and hollows by the even-odd rule).
func Structures(s *Source, c *dosemap.Case, r *review.Result, now time.Time) (Object, error) {
	if r.Lethal == nil {
		return Object{}, fmt.Errorf("structures: the analysis holds no lethal region")
	}
	sop, series := NewUID(), NewUID()
	var e elems
	s.common(&e, SOPClassRTStructureSet, sop, series, SeriesNumberStructures, "RTSTRUCT", "Thermal dose regions (dosecover)", now)
	e.Add(tag.OperatorsName, "")
	e.Add(tag.InstanceNumber, "1")
	e.Add(tag.FrameOfReferenceUID, s.FrameOfReference)
	e.Add(tag.PositionReferenceIndicator, "")
	e.Add(tag.StructureSetLabel, "DOSE REGIONS")
	e.Add(tag.StructureSetName, "Lethal region and holes")
	e.Add(tag.StructureSetDescription, Caution)
	e.Add(tag.StructureSetDate, now.Format("20060102"))
	e.Add(tag.StructureSetTime, now.Format("150405"))
	var frame elems
	frame.Add(tag.FrameOfReferenceUID, s.FrameOfReference)
	e.Seq(tag.ReferencedFrameOfReferenceSequence, frame)

	type roi struct {
		name, interp, algorithm string
		colour                  []string
		contours                []dosemap.Contour
	}
	var rois []roi
	// Display colours from dosecover's palette (review/palette.go: Okabe-Ito).
	if t := c.Target(); t != nil {
		// Not PTV: read back beside the plan, a copy must never be taken
		// for the plan's own target.
		rois = append(rois, roi{t.Name + " (as reviewed)", "CONTROL", "MANUAL", []string{"230", "159", "0"}, t.Contours})
	}
	lethal := maskContours(r.Lethal, func(v float32) bool { return v >= 0.5 })
	rois = append(rois, roi{fmt.Sprintf("Lethal dose >= %g %s", r.Threshold, r.DoseUnit), "TREATED_VOLUME", "AUTOMATIC", []string{"204", "121", "167"}, lethal})
	if r.HoleLabels != nil && len(r.Holes) > 0 {
		holes := maskContours(r.HoleLabels, func(v float32) bool { return v >= 1 })
		rois = append(rois, roi{"Holes in the target", "CONTROL", "AUTOMATIC", []string{"86", "180", "233"}, holes})
	}
	var ssroi, contours, obs []elems
	for n, r := range rois {
		num := strconv.Itoa(n + 1)
		var it elems
		it.Add(tag.ROINumber, num)
		it.Add(tag.ReferencedFrameOfReferenceUID, s.FrameOfReference)
		it.Add(tag.ROIName, r.name)
		it.Add(tag.ROIGenerationAlgorithm, r.algorithm)
		ssroi = append(ssroi, it)
		var cs []elems
		for m, ct := range r.contours {
			var ce elems
			ce.Add(tag.ContourGeometricType, "CLOSED_PLANAR")
			ce.Add(tag.NumberOfContourPoints, strconv.Itoa(len(ct.Points)))
			ce.Add(tag.ContourNumber, strconv.Itoa(m+1))
			ce.Add(tag.ContourData, dicomwrite.ContourData(ct.Points))
			cs = append(cs, ce)
		}
		var rc elems
		rc.Add(tag.ROIDisplayColor, r.colour)
		if len(cs) > 0 {
			rc.Seq(tag.ContourSequence, cs...)
		}
		rc.Add(tag.ReferencedROINumber, num)
		contours = append(contours, rc)
		var ob elems
		ob.Add(tag.ObservationNumber, num)
		ob.Add(tag.ReferencedROINumber, num)
		ob.Add(tag.RTROIInterpretedType, r.interp)
		ob.Add(tag.ROIInterpreter, "")
		obs = append(obs, ob)
	}
	e.Seq(tag.StructureSetROISequence, ssroi...)
	e.Seq(tag.ROIContourSequence, contours...)
	e.Seq(tag.RTROIObservationsSequence, obs...)
	e.Add(tag.ApprovalStatus, "UNAPPROVED")
	data, err := encode(SOPClassRTStructureSet, sop, e)
	if err != nil {
		return Object{}, err
	}
	return Object{Name: "regions-" + sop + ".dcm", Data: data}, nil
}

// maskContours traces the outline of the voxels of v where in holds, slice
// by slice: the slice is padded with one voxel outside on every side so
// every outline closes, and traced at 0.5 between inside (1) and outside
// (0) voxel centres.
func maskContours(v *dosemap.Volume, in func(float32) bool) []dosemap.Contour {
	g := v.Geometry
	w, h := g.Cols+2, g.Rows+2
	buf := make([]float32, w*h)
	var out []dosemap.Contour
	for k := 0; k < g.Slices; k++ {
		any := false
		for j := 0; j < g.Rows; j++ {
			for i := 0; i < g.Cols; i++ {
				x := float32(0)
				if in(v.Data[g.Index(i, j, k)]) {
					x, any = 1, true
				}
				buf[(j+1)*w+i+1] = x
			}
		}
		if !any {
			continue
		}
		for _, pl := range view.MarchingSquares(buf, w, h, 0.5) {
			if !pl.Closed || len(pl.Pixels) < 3 {
				continue
			}
			pts := make([]dosemap.Vec3, len(pl.Pixels))
			for n, q := range pl.Pixels {
				pts[n] = g.Point(q.X-1, q.Y-1, float64(k))
			}
			out = append(out, dosemap.Contour{Points: pts})
		}
	}
	return out
}

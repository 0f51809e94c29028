package sim

import (
	"fmt"
	"math"
	"os"
	"path/filepath"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomwrite"

	"github.com/suyashkumar/dicom/pkg/tag"
)

// contourPoints is the number of vertices of each written contour.
const contourPoints = 72

// Contours returns the planar contours of the target (the lesion) and of
// the avoid structure on the anatomy planes, as written to the RTSTRUCT.
// Each plane that cuts the lesion gets one polygon; the avoid tube gets one
// on every plane.
func (s *Session) Contours() (target, avoid []dosemap.Contour, planes []int) {
	g := s.AnatomyGeometry()
	l := s.Phantom.Lesion
	tb := s.Phantom.Avoid
	for k := 0; k < g.Slices; k++ {
		z := g.Point(0, 0, float64(k))[2]
		dz := (z - l.Center[2]) / l.SemiAxes[2]
		var pts []dosemap.Vec3
		if f := 1 - dz*dz; f > 0.02 {
			sc := math.Sqrt(f)
			for n := 0; n < contourPoints; n++ {
				a := 2 * math.Pi * float64(n) / contourPoints
				pts = append(pts, dosemap.Vec3{l.Center[0] + sc*l.SemiAxes[0]*math.Cos(a), l.Center[1] + sc*l.SemiAxes[1]*math.Sin(a), z})
			}
			target = append(target, dosemap.Contour{Points: pts})
			planes = append(planes, k)
		}
		var ap []dosemap.Vec3
		for n := 0; n < contourPoints/2; n++ {
			a := 2 * math.Pi * float64(n) / (contourPoints / 2)
			ap = append(ap, dosemap.Vec3{tb.Center[0] + tb.Radius*math.Cos(a), tb.Center[1] + tb.Radius*math.Sin(a), z})
		}
		avoid = append(avoid, dosemap.Contour{Points: ap})
	}
	return target, avoid, planes
}

// writeStructures writes the RT Structure Set (PS3.3 A.19): Patient,
// General Study, RT Series, General Equipment, Structure Set, ROI Contour,
// RT ROI Observations and SOP Common modules. ROI 1 is the target (PTV),
// ROI 2 the avoid structure (AVOIDANCE).
func (s *Session) writeStructures(dir string, id ids, truth *Truth) error {
	g := s.AnatomyGeometry()
	target, avoid, tplanes := s.Contours()
	var e elems
	s.patientStudy(&e, id, SOPClassRTStructure, id.structInstance)
	when := s.Start.Add(-5 * 60e9)
	e.Add(tag.InstanceCreationDate, dicomDate(when))
	e.Add(tag.InstanceCreationTime, dicomTime(when))
	e.Add(tag.SeriesDate, dicomDate(when))
	e.Add(tag.SeriesTime, dicomTime(when))
	e.Add(tag.Modality, "RTSTRUCT")
	e.Add(tag.SeriesDescription, "Treatment plan structures")
	e.Add(tag.OperatorsName, "")
	e.Add(tag.SeriesInstanceUID, id.structSeries)
	e.Add(tag.SeriesNumber, "900")
	e.Add(tag.InstanceNumber, "1")
	e.Add(tag.FrameOfReferenceUID, id.frame)
	e.Add(tag.PositionReferenceIndicator, "")
	e.Add(tag.StructureSetLabel, "PLAN")
	e.Add(tag.StructureSetName, "Ablation plan")
	e.Add(tag.StructureSetDate, dicomDate(when))
	e.Add(tag.StructureSetTime, dicomTime(when))

	imageRef := func(k int) elems {
		var r elems
		r.Add(tag.ReferencedSOPClassUID, SOPClassMRImage)
		r.Add(tag.ReferencedSOPInstanceUID, id.instance(id.anatomySeries, k+1))
		return r
	}
	var images []elems
	for k := 0; k < g.Slices; k++ {
		images = append(images, imageRef(k))
	}
	var series elems
	series.Add(tag.SeriesInstanceUID, id.anatomySeries)
	series.Seq(tag.ContourImageSequence, images...)
	var study elems
	study.Add(tag.ReferencedSOPClassUID, studyComponentSOP)
	study.Add(tag.ReferencedSOPInstanceUID, id.study)
	study.Seq(tag.RTReferencedSeriesSequence, series)
	var frame elems
	frame.Add(tag.FrameOfReferenceUID, id.frame)
	frame.Seq(tag.RTReferencedStudySequence, study)
	e.Seq(tag.ReferencedFrameOfReferenceSequence, frame)

	type roi struct {
		number       int
		name, interp string
		color        []string
		contours     []dosemap.Contour
		planes       []int
	}
	allPlanes := make([]int, g.Slices)
	for k := range allPlanes {
		allPlanes[k] = k
	}
	rois := []roi{
		// Display colours from the Okabe–Ito palette (review/palette.go).
		{1, "Target", "PTV", []string{"230", "159", "0"}, target, tplanes},
		{2, "Avoid tube", "AVOIDANCE", []string{"240", "228", "66"}, avoid, allPlanes},
	}
	var ssroi, contours, obs []elems
	for _, r := range rois {
		var it elems
		it.Add(tag.ROINumber, fmt.Sprint(r.number))
		it.Add(tag.ReferencedFrameOfReferenceUID, id.frame)
		it.Add(tag.ROIName, r.name)
		it.Add(tag.ROIGenerationAlgorithm, "MANUAL")
		ssroi = append(ssroi, it)

		var cs []elems
		for n, c := range r.contours {
			var ce elems
			ce.Seq(tag.ContourImageSequence, imageRef(r.planes[n]))
			ce.Add(tag.ContourGeometricType, "CLOSED_PLANAR")
			ce.Add(tag.NumberOfContourPoints, fmt.Sprint(len(c.Points)))
			ce.Add(tag.ContourNumber, fmt.Sprint(n+1))
			ce.Add(tag.ContourData, dicomwrite.ContourData(c.Points))
			cs = append(cs, ce)
		}
		var rc elems
		rc.Add(tag.ROIDisplayColor, r.color)
		rc.Seq(tag.ContourSequence, cs...)
		rc.Add(tag.ReferencedROINumber, fmt.Sprint(r.number))
		contours = append(contours, rc)

		var ob elems
		ob.Add(tag.ObservationNumber, fmt.Sprint(r.number))
		ob.Add(tag.ReferencedROINumber, fmt.Sprint(r.number))
		ob.Add(tag.RTROIInterpretedType, r.interp)
		ob.Add(tag.ROIInterpreter, "")
		obs = append(obs, ob)
	}
	e.Seq(tag.StructureSetROISequence, ssroi...)
	e.Seq(tag.ROIContourSequence, contours...)
	e.Seq(tag.RTROIObservationsSequence, obs...)
	e.Add(tag.ApprovalStatus, "UNAPPROVED")

	data, err := encode(SOPClassRTStructure, id.structInstance, e)
	if err != nil {
		return fmt.Errorf("encoding structures of %s: %w", s.Label, err)
	}
	path := filepath.Join(dir, StructuresFile)
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return fmt.Errorf("creating %s: %w", filepath.Dir(path), err)
	}
	if err := writeFileAtomic(path, data); err != nil {
		return err
	}
	truth.Files++
	return nil
}

package sim

import (
	"fmt"
	"math"
	"os"
	"path/filepath"

	"dosecover/dosemap"

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
	e.add(tag.InstanceCreationDate, dicomDate(when))
	e.add(tag.InstanceCreationTime, dicomTime(when))
	e.add(tag.SeriesDate, dicomDate(when))
	e.add(tag.SeriesTime, dicomTime(when))
	e.add(tag.Modality, "RTSTRUCT")
	e.add(tag.SeriesDescription, "Treatment plan structures")
	e.add(tag.OperatorsName, "")
	e.add(tag.SeriesInstanceUID, id.structSeries)
	e.add(tag.SeriesNumber, "900")
	e.add(tag.InstanceNumber, "1")
	e.add(tag.FrameOfReferenceUID, id.frame)
	e.add(tag.PositionReferenceIndicator, "")
	e.add(tag.StructureSetLabel, "PLAN")
	e.add(tag.StructureSetName, "Ablation plan")
	e.add(tag.StructureSetDate, dicomDate(when))
	e.add(tag.StructureSetTime, dicomTime(when))

	imageRef := func(k int) elems {
		var r elems
		r.add(tag.ReferencedSOPClassUID, SOPClassMRImage)
		r.add(tag.ReferencedSOPInstanceUID, id.instance(id.anatomySeries, k+1))
		return r
	}
	var images []elems
	for k := 0; k < g.Slices; k++ {
		images = append(images, imageRef(k))
	}
	var series elems
	series.add(tag.SeriesInstanceUID, id.anatomySeries)
	series.seq(tag.ContourImageSequence, images...)
	var study elems
	study.add(tag.ReferencedSOPClassUID, studyComponentSOP)
	study.add(tag.ReferencedSOPInstanceUID, id.study)
	study.seq(tag.RTReferencedSeriesSequence, series)
	var frame elems
	frame.add(tag.FrameOfReferenceUID, id.frame)
	frame.seq(tag.RTReferencedStudySequence, study)
	e.seq(tag.ReferencedFrameOfReferenceSequence, frame)

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
		it.add(tag.ROINumber, fmt.Sprint(r.number))
		it.add(tag.ReferencedFrameOfReferenceUID, id.frame)
		it.add(tag.ROIName, r.name)
		it.add(tag.ROIGenerationAlgorithm, "MANUAL")
		ssroi = append(ssroi, it)

		var cs []elems
		for n, c := range r.contours {
			var ce elems
			ce.seq(tag.ContourImageSequence, imageRef(r.planes[n]))
			ce.add(tag.ContourGeometricType, "CLOSED_PLANAR")
			ce.add(tag.NumberOfContourPoints, fmt.Sprint(len(c.Points)))
			ce.add(tag.ContourNumber, fmt.Sprint(n+1))
			xs := make([]float64, 0, 3*len(c.Points))
			for _, p := range c.Points {
				xs = append(xs, p[0], p[1], p[2])
			}
			ce.add(tag.ContourData, joinDS(xs))
			cs = append(cs, ce)
		}
		var rc elems
		rc.add(tag.ROIDisplayColor, r.color)
		rc.seq(tag.ContourSequence, cs...)
		rc.add(tag.ReferencedROINumber, fmt.Sprint(r.number))
		contours = append(contours, rc)

		var ob elems
		ob.add(tag.ObservationNumber, fmt.Sprint(r.number))
		ob.add(tag.ReferencedROINumber, fmt.Sprint(r.number))
		ob.add(tag.RTROIInterpretedType, r.interp)
		ob.add(tag.ROIInterpreter, "")
		obs = append(obs, ob)
	}
	e.seq(tag.StructureSetROISequence, ssroi...)
	e.seq(tag.ROIContourSequence, contours...)
	e.seq(tag.RTROIObservationsSequence, obs...)
	e.add(tag.ApprovalStatus, "UNAPPROVED")

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

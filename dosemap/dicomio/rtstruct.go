package dicomio

import (
	"fmt"
	"math"
	"strings"

	"dosecover/dosemap"

	"github.com/suyashkumar/dicom/pkg/tag"
)

const sopRTStructureSet = "1.2.840.10008.5.1.4.1.1.481.3"

var (
	tagStructureSetROISeq  = tag.Tag{Group: 0x3006, Element: 0x0020}
	tagROINumber           = tag.Tag{Group: 0x3006, Element: 0x0022}
	tagRefFrameOfRefUID    = tag.Tag{Group: 0x3006, Element: 0x0024}
	tagROIName             = tag.Tag{Group: 0x3006, Element: 0x0026}
	tagROIContourSeq       = tag.Tag{Group: 0x3006, Element: 0x0039}
	tagContourSeq          = tag.Tag{Group: 0x3006, Element: 0x0040}
	tagContourGeometric    = tag.Tag{Group: 0x3006, Element: 0x0042}
	tagContourData         = tag.Tag{Group: 0x3006, Element: 0x0050}
	tagRTROIObservationSeq = tag.Tag{Group: 0x3006, Element: 0x0080}
	tagRefROINumber        = tag.Tag{Group: 0x3006, Element: 0x0084}
	tagRTROIInterpreted    = tag.Tag{Group: 0x3006, Element: 0x00A4}
	tagRefFrameOfRefSeq    = tag.Tag{Group: 0x3006, Element: 0x0010}
	tagStructureSetLabel   = tag.Tag{Group: 0x3006, Element: 0x0002}
)

// structureSet is what an RTSTRUCT file holds.
type structureSet struct {
	Label      string
	FrameOfRef string
	Structures []dosemap.Structure
	Info       []StructureInfo
	Problems   []string
}

// RoleOf maps an RTROIInterpretedType (3006,00A4) to the structure's role:
// PTV, CTV and GTV are targets; AVOIDANCE and ORGAN are regions to avoid;
// every other type (EXTERNAL, MARKER, CONTROL, ...) or none is "other".
func RoleOf(interpretedType string) dosemap.StructureRole {
	switch strings.ToUpper(strings.TrimSpace(interpretedType)) {
	case "PTV", "CTV", "GTV":
		return dosemap.RoleTarget
	case "AVOIDANCE", "ORGAN":
		return dosemap.RoleAvoid
	}
	return dosemap.RoleOther
}

// ReadStructureSet reads the structures of one RTSTRUCT dataset from raw
// file bytes. CLOSED_PLANAR contours become polygons; POINT and other
// contour types are counted in the returned StructureInfo and ignored.
// name is used in messages only.
func ReadStructureSet(name string, data []byte) ([]dosemap.Structure, []StructureInfo, error) {
	fi, err := readBytes(name, data, false)
	if err != nil {
		return nil, nil, fmt.Errorf("reading %s: %w", name, err)
	}
	if fi.Structures == nil {
		return nil, nil, fmt.Errorf("reading %s: not an RTSTRUCT (Modality %q)", name, fi.Modality)
	}
	return fi.Structures.Structures, fi.Structures.Info, nil
}

// parseStructureSet walks StructureSetROISequence, RTROIObservationsSequence
// and ROIContourSequence of an RTSTRUCT dataset.
func parseStructureSet(es elems) (*structureSet, error) {
	ss := &structureSet{Label: es.str(tagStructureSetLabel)}
	if it := es.first(tagRefFrameOfRefSeq); it != nil {
		ss.FrameOfRef = it.str(tag.FrameOfReferenceUID)
	}
	rois := es.items(tagStructureSetROISeq)
	if len(rois) == 0 {
		return nil, skip("RTSTRUCT without %s", tagName(tagStructureSetROISeq))
	}
	type roi struct {
		s    dosemap.Structure
		info StructureInfo
	}
	byNum := map[int]*roi{}
	var order []int
	for n, it := range rois {
		num, ok := it.int(tagROINumber)
		if !ok {
			num = -(n + 1)
		}
		r := &roi{s: dosemap.Structure{Number: num, Name: it.str(tagROIName), FrameOfRef: it.str(tagRefFrameOfRefUID)}}
		if r.s.FrameOfRef == "" {
			r.s.FrameOfRef = ss.FrameOfRef
		}
		if ss.FrameOfRef == "" {
			ss.FrameOfRef = r.s.FrameOfRef
		}
		if _, dup := byNum[num]; dup {
			ss.Problems = append(ss.Problems, fmt.Sprintf("ROI number %d appears twice in StructureSetROISequence", num))
			continue
		}
		for _, o := range order {
			if other := byNum[o]; strings.EqualFold(strings.TrimSpace(other.s.Name), strings.TrimSpace(r.s.Name)) && r.s.Name != "" {
				ss.Problems = append(ss.Problems, fmt.Sprintf("ROI %d and ROI %d have the same name %q: duplicated ROI", o, num, r.s.Name))
				break
			}
		}
		byNum[num] = r
		order = append(order, num)
	}
	for _, it := range es.items(tagRTROIObservationSeq) {
		if num, ok := it.int(tagRefROINumber); ok {
			if r := byNum[num]; r != nil {
				r.s.InterpretedType = strings.TrimSpace(it.str(tagRTROIInterpreted))
				r.s.Role = RoleOf(r.s.InterpretedType)
			}
		}
	}
	for _, it := range es.items(tagROIContourSeq) {
		num, ok := it.int(tagRefROINumber)
		r := byNum[num]
		if !ok || r == nil {
			ss.Problems = append(ss.Problems, fmt.Sprintf("ROIContourSequence refers to ROI %d, which StructureSetROISequence does not define", num))
			continue
		}
		planes := map[int64]bool{}
		for _, c := range it.items(tagContourSeq) {
			typ := strings.ToUpper(c.str(tagContourGeometric))
			pts, err := contourPoints(c)
			if err != nil {
				ss.Problems = append(ss.Problems, fmt.Sprintf("ROI %d %q: %v", num, r.s.Name, err))
				continue
			}
			if typ != "CLOSED_PLANAR" {
				if r.info.Ignored == nil {
					r.info.Ignored = map[string]int{}
				}
				if typ == "" {
					typ = "(no type)"
				}
				r.info.Ignored[typ]++
				continue
			}
			if len(pts) < 3 {
				ss.Problems = append(ss.Problems, fmt.Sprintf("ROI %d %q: CLOSED_PLANAR contour with %d points ignored", num, r.s.Name, len(pts)))
				continue
			}
			r.s.Contours = append(r.s.Contours, dosemap.Contour{Points: pts})
			planes[int64(planeKey(pts))] = true
		}
		r.info.Planes = len(planes)
	}
	for _, num := range order {
		r := byNum[num]
		r.info.Number = r.s.Number
		r.info.Name = r.s.Name
		r.info.InterpretedType = r.s.InterpretedType
		r.info.Role = r.s.Role.String()
		r.info.Contours = len(r.s.Contours)
		r.info.FrameOfRef = r.s.FrameOfRef
		ss.Structures = append(ss.Structures, r.s)
		ss.Info = append(ss.Info, r.info)
	}
	return ss, nil
}

// planeKey identifies the plane of a planar contour by its mean z rounded to
// 0.01 mm (used only for counting planes).
func planeKey(pts []dosemap.Vec3) float64 {
	var z float64
	for _, p := range pts {
		z += p[2]
	}
	return float64(int64(z / float64(len(pts)) * 100))
}

// contourPoints parses ContourData (x1\y1\z1\x2...) into points.
func contourPoints(c elems) ([]dosemap.Vec3, error) {
	e := c.find(tagContourData)
	if e == nil || e.Value == nil {
		return nil, fmt.Errorf("contour without %s", tagName(tagContourData))
	}
	v, ok := c.floats(tagContourData)
	if !ok {
		if s, isStr := e.Value.GetValue().([]string); isStr && len(s) == 0 {
			return nil, nil
		}
		return nil, fmt.Errorf("%s does not hold numbers", tagName(tagContourData))
	}
	if len(v)%3 != 0 {
		return nil, fmt.Errorf("%s holds %d values, not a multiple of 3", tagName(tagContourData), len(v))
	}
	pts := make([]dosemap.Vec3, len(v)/3)
	for n := range pts {
		pts[n] = dosemap.Vec3{v[3*n], v[3*n+1], v[3*n+2]}
		for _, x := range pts[n] {
			if !finite(x) || math.Abs(x) > maxPositionMM {
				return nil, fmt.Errorf("%s point %d is (%g, %g, %g) mm, more than %g mm from the origin: contour ignored",
					tagName(tagContourData), n+1, pts[n][0], pts[n][1], pts[n][2], maxPositionMM)
			}
		}
	}
	return pts, nil
}

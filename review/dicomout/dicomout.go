// Package dicomout writes the results of a review as DICOM objects that an
// archive can hold beside the images they were computed from:
//
//   - the one-page report as an Encapsulated PDF (PS3.3 A.45.1);
//   - the cumulative thermal dose as MR images (PS3.3 A.4, DERIVED) whose
//     Real World Value Mapping (PS3.3 C.7.6.16.2.11) is labelled "CEM43"
//     in minutes, the form dosecover reads as a dose map (dosemap/dicomio);
//   - the target, the lethal region and the holes as an RT Structure Set
//     (PS3.3 A.19) in the frame of reference of the source images.
//
// Each object is a new series of the source study (same StudyInstanceUID,
// new Series and SOP Instance UIDs, the source series listed in
// RelatedSeriesSequence (0008,1250) of the General Series module), or, de-identified, of a study
// whose UIDs are replaced as dosemap/deid replaces them (PS3.15 Annex E).
package dicomout

import (
	"bytes"
	"crypto/rand"
	"fmt"
	"math/big"
	"sort"
	"strconv"
	"strings"
	"time"

	"dosecover/dosemap"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// SOP classes written (PS3.4 Annex B).
const (
	SOPClassEncapsulatedPDF = "1.2.840.10008.5.1.4.1.1.104.1"
	SOPClassMRImage         = "1.2.840.10008.5.1.4.1.1.4"
	SOPClassRTStructureSet  = "1.2.840.10008.5.1.4.1.1.481.3"
	explicitVRLittle        = "1.2.840.10008.1.2.1"
	implementationLabel     = "DOSECOVER"
)

// implementationUID names dosecover as the writing implementation (PS3.7
// D.3.3.2); a fixed UUID-derived UID (PS3.5 B.2).
const implementationUID = "2.25.276110537093528476906158730152327165829"

// Source is what the results take over from the source study.
type Source struct {
	StudyUID            string
	StudyDate           string // YYYYMMDD
	StudyTime           string
	StudyID             string
	AccessionNumber     string
	ReferringPhysician  string
	StudyDescription    string
	PatientName         string
	PatientID           string
	PatientBirthDate    string
	PatientSex          string
	FrameOfReference    string   // of the analysis (the anatomy's)
	Series              []string // source SeriesInstanceUIDs the results are computed from
	IdentityRemoved     bool     // PatientIdentityRemoved (0012,0062) of the objects
	DeidentificationWay string   // DeidentificationMethod when IdentityRemoved
}

// NewUID returns a fresh UUID-derived UID, "2.25." and a random 128-bit
// number (PS3.5 B.2).
func NewUID() string {
	b := make([]byte, 16)
	rand.Read(b)
	b[6] = b[6]&0x0f | 0x40 // version 4 (RFC 4122)
	b[8] = b[8]&0x3f | 0x80
	return "2.25." + new(big.Int).SetBytes(b).String()
}

// elems collects the elements of one data set.
type elems []*dicom.Element

func (e *elems) add(t tag.Tag, v any) {
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
		panic(fmt.Sprintf("dicomout: element %v: %v", t, err)) // programmer error: wrong Go type for the VR
	}
	*e = append(*e, el)
}

// addVR adds an element whose tag allows several VRs, with the VR given.
func (e *elems) addVR(t tag.Tag, vr string, v any) {
	e.add(t, v)
	(*e)[len(*e)-1].RawValueRepresentation = vr
}

func (e *elems) seq(t tag.Tag, items ...elems) {
	v := make([][]*dicom.Element, len(items))
	for n, it := range items {
		sortElems(it)
		v[n] = it
	}
	e.add(t, v)
}

func sortElems(es elems) {
	sort.SliceStable(es, func(a, b int) bool {
		if es[a].Tag.Group != es[b].Tag.Group {
			return es[a].Tag.Group < es[b].Tag.Group
		}
		return es[a].Tag.Element < es[b].Tag.Element
	})
}

// ds formats a decimal string (VR DS, at most 16 characters).
func ds(x float64) string {
	for prec := 10; prec > 0; prec-- {
		s := strconv.FormatFloat(x, 'g', prec, 64)
		if len(s) <= 16 {
			return s
		}
	}
	return "0"
}

func dsList(xs ...float64) []string {
	out := make([]string, len(xs))
	for n, x := range xs {
		out[n] = ds(x)
	}
	return out
}

// joinDS pre-joins coordinates into one backslash-separated DS value: the
// DICOM library joins a list of strings in quadratic time.
func joinDS(xs []float64) string {
	var sb strings.Builder
	sb.Grow(10 * len(xs))
	for n, x := range xs {
		if n > 0 {
			sb.WriteByte('\\')
		}
		sb.WriteString(strconv.FormatFloat(x, 'f', 3, 64))
	}
	return sb.String()
}

// common adds the Patient, General Study, General Equipment and SOP Common
// attributes (PS3.3 C.7.1.1, C.7.2.1, C.7.5.1, C.12.1) and the new
// series' General Series attributes.
func (s *Source) common(e *elems, sopClass, sop, series string, seriesNumber int, modality, description string, now time.Time) {
	e.add(tag.SpecificCharacterSet, "ISO_IR 192")
	e.add(tag.SOPClassUID, sopClass)
	e.add(tag.SOPInstanceUID, sop)
	e.add(tag.InstanceCreationDate, now.Format("20060102"))
	e.add(tag.InstanceCreationTime, now.Format("150405"))
	e.add(tag.StudyDate, s.StudyDate)
	e.add(tag.StudyTime, s.StudyTime)
	e.add(tag.SeriesDate, now.Format("20060102"))
	e.add(tag.SeriesTime, now.Format("150405"))
	e.add(tag.AccessionNumber, s.AccessionNumber)
	e.add(tag.Modality, modality)
	e.add(tag.Manufacturer, "dosecover")
	e.add(tag.ReferringPhysicianName, s.ReferringPhysician)
	if s.StudyDescription != "" {
		e.add(tag.StudyDescription, s.StudyDescription)
	}
	e.add(tag.SeriesDescription, description)
	e.add(tag.ManufacturerModelName, "dosecover")
	var refs []elems
	for _, u := range s.Series {
		var r elems
		r.add(tag.StudyInstanceUID, s.StudyUID)
		r.add(tag.SeriesInstanceUID, u)
		r.seq(tag.PurposeOfReferenceCodeSequence) // type 2: empty
		refs = append(refs, r)
	}
	if len(refs) > 0 {
		e.seq(tag.Tag{Group: 0x0008, Element: 0x1250}, refs...) // RelatedSeriesSequence (PS3.3 C.7.3.1)
	}
	e.add(tag.PatientName, s.PatientName)
	e.add(tag.PatientID, s.PatientID)
	e.add(tag.PatientBirthDate, s.PatientBirthDate)
	e.add(tag.PatientSex, s.PatientSex)
	if s.IdentityRemoved {
		e.add(tag.PatientIdentityRemoved, "YES")
		e.add(tag.DeidentificationMethod, s.DeidentificationWay)
	}
	e.add(tag.SoftwareVersions, dosemap.Version)
	e.add(tag.StudyInstanceUID, s.StudyUID)
	e.add(tag.SeriesInstanceUID, series)
	e.add(tag.StudyID, s.StudyID)
	e.add(tag.SeriesNumber, strconv.Itoa(seriesNumber))
}

// encode returns a DICOM Part 10 file (explicit VR little endian) with the
// data set body; the file meta information is added here.
func encode(sopClass, sop string, body elems) ([]byte, error) {
	var all elems
	all.add(tag.FileMetaInformationVersion, []byte{0, 1})
	all.add(tag.MediaStorageSOPClassUID, sopClass)
	all.add(tag.MediaStorageSOPInstanceUID, sop)
	all.add(tag.TransferSyntaxUID, explicitVRLittle)
	all.add(tag.ImplementationClassUID, implementationUID)
	all.add(tag.ImplementationVersionName, implementationLabel)
	all = append(all, body...)
	sortElems(all)
	var buf bytes.Buffer
	if err := dicom.Write(&buf, dicom.Dataset{Elements: all}); err != nil {
		return nil, fmt.Errorf("encoding %s: %w", sop, err)
	}
	return buf.Bytes(), nil
}

// Object is one DICOM file to write or store.
type Object struct {
	Name string // file name: a short kind and the SOP Instance UID
	Data []byte // DICOM Part 10 bytes
}

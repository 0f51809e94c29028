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
	"crypto/rand"
	"math/big"
	"strconv"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/dicomwrite"

	"github.com/suyashkumar/dicom/pkg/tag"
)

// SOP classes written (PS3.4 Annex B).
const (
	SOPClassEncapsulatedPDF = "1.2.840.10008.5.1.4.1.1.104.1"
	SOPClassMRImage         = "1.2.840.10008.5.1.4.1.1.4"
	SOPClassRTStructureSet  = "1.2.840.10008.5.1.4.1.1.481.3"
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
type elems = dicomwrite.Elements

// ds formats a decimal string (VR DS).
var ds = dicomwrite.DS

// common adds the Patient, General Study, General Equipment and SOP Common
// attributes (PS3.3 C.7.1.1, C.7.2.1, C.7.5.1, C.12.1) and the new
// series' General Series attributes.
func (s *Source) common(e *elems, sopClass, sop, series string, seriesNumber int, modality, description string, now time.Time) {
	e.Add(tag.SpecificCharacterSet, "ISO_IR 192")
	e.Add(tag.SOPClassUID, sopClass)
	e.Add(tag.SOPInstanceUID, sop)
	e.Add(tag.InstanceCreationDate, now.Format("20060102"))
	e.Add(tag.InstanceCreationTime, now.Format("150405"))
	e.Add(tag.StudyDate, s.StudyDate)
	e.Add(tag.StudyTime, s.StudyTime)
	e.Add(tag.SeriesDate, now.Format("20060102"))
	e.Add(tag.SeriesTime, now.Format("150405"))
	e.Add(tag.AccessionNumber, s.AccessionNumber)
	e.Add(tag.Modality, modality)
	e.Add(tag.Manufacturer, "dosecover")
	e.Add(tag.ReferringPhysicianName, s.ReferringPhysician)
	if s.StudyDescription != "" {
		e.Add(tag.StudyDescription, s.StudyDescription)
	}
	e.Add(tag.SeriesDescription, description)
	e.Add(tag.ManufacturerModelName, "dosecover")
	var refs []elems
	for _, u := range s.Series {
		var r elems
		r.Add(tag.StudyInstanceUID, s.StudyUID)
		r.Add(tag.SeriesInstanceUID, u)
		r.Seq(tag.PurposeOfReferenceCodeSequence) // type 2: empty
		refs = append(refs, r)
	}
	if len(refs) > 0 {
		e.Seq(tag.Tag{Group: 0x0008, Element: 0x1250}, refs...) // RelatedSeriesSequence (PS3.3 C.7.3.1)
	}
	e.Add(tag.PatientName, s.PatientName)
	e.Add(tag.PatientID, s.PatientID)
	e.Add(tag.PatientBirthDate, s.PatientBirthDate)
	e.Add(tag.PatientSex, s.PatientSex)
	if s.IdentityRemoved {
		e.Add(tag.PatientIdentityRemoved, "YES")
		e.Add(tag.DeidentificationMethod, s.DeidentificationWay)
	}
	e.Add(tag.SoftwareVersions, dosemap.Version)
	e.Add(tag.StudyInstanceUID, s.StudyUID)
	e.Add(tag.SeriesInstanceUID, series)
	e.Add(tag.StudyID, s.StudyID)
	e.Add(tag.SeriesNumber, strconv.Itoa(seriesNumber))
}

// encode returns a DICOM Part 10 file (explicit VR little endian) with the
// data set body; the file meta information is added here.
func encode(sopClass, sop string, body elems) ([]byte, error) {
	return dicomwrite.Encode(dicomwrite.Implementation{ClassUID: implementationUID, VersionName: implementationLabel}, sopClass, sop, body)
}

// Object is one DICOM file to write or store.
type Object struct {
	Name string // file name: a short kind and the SOP Instance UID
	Data []byte // DICOM Part 10 bytes
}

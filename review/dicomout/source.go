package dicomout

import (
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"time"

	"dosecover/dosemap"
	"dosecover/dosemap/deid"
	"dosecover/dosemap/dicomio"
	"dosecover/dosemap/safefile"
	"dosecover/review"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

var errFound = errors.New("found")

// ReadSource takes the study attributes of the case c from the folder dir
// it was read from: from the first file of one of its thermometry series
// (pixel data skipped). The results reference the anatomy series used and
// every sonication series.
func ReadSource(dir string, c *dosemap.Case) (*Source, error) {
	want := map[string]bool{}
	var series []string
	for _, so := range c.Sonications {
		if so.SeriesUID != "" && !want[so.SeriesUID] {
			want[so.SeriesUID] = true
			series = append(series, so.SeriesUID)
		}
	}
	if len(want) == 0 {
		return nil, fmt.Errorf("%s: the case has no sonication series to refer to", dir)
	}
	// The anatomy series the analysis used is referenced too.
	if inv, err := dicomio.Scan(context.Background(), dir, nil); err == nil {
		for _, si := range inv.Series {
			if si.Role == dicomio.RoleAnatomy && si.Default && si.UID != "" && !want[si.UID] {
				series = append([]string{si.UID}, series...)
			}
		}
	}
	var src *Source
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() || !d.Type().IsRegular() {
			return nil
		}
		ds, perr := dicom.ParseFile(p, nil, dicom.SkipPixelData())
		if perr != nil {
			return nil
		}
		get := func(t tag.Tag) string {
			el, err := ds.FindElementByTag(t)
			if err != nil {
				return ""
			}
			if v, ok := el.Value.GetValue().([]string); ok && len(v) > 0 {
				return strings.Join(v, `\`)
			}
			return ""
		}
		if !want[get(tag.SeriesInstanceUID)] {
			return nil
		}
		src = &Source{
			StudyUID: get(tag.StudyInstanceUID), StudyDate: get(tag.StudyDate), StudyTime: get(tag.StudyTime),
			StudyID: get(tag.StudyID), AccessionNumber: get(tag.AccessionNumber),
			ReferringPhysician: get(tag.ReferringPhysicianName), StudyDescription: get(tag.StudyDescription),
			PatientName: get(tag.PatientName), PatientID: get(tag.PatientID),
			PatientBirthDate: get(tag.PatientBirthDate), PatientSex: get(tag.PatientSex),
			FrameOfReference: c.FrameOfRef, Series: series,
		}
		if src.FrameOfReference == "" {
			src.FrameOfReference = get(tag.FrameOfReferenceUID)
		}
		return errFound
	})
	if err != nil && err != errFound {
		return nil, fmt.Errorf("reading %s: %w", dir, err)
	}
	if src == nil || src.StudyUID == "" || src.FrameOfReference == "" {
		return nil, fmt.Errorf("%s: no file of the case's thermometry series gives the study and frame of reference UIDs", dir)
	}
	return src, nil
}

// Deidentified returns a copy of s whose identity is replaced by label,
// whose dates and study identifiers are blank and whose UIDs are replaced
// through d (dosemap/deid: hashed with its salt), so that the results
// cannot be linked back to the patient.
func (s *Source) Deidentified(d *deid.Deidentifier, label string) *Source {
	o := &Source{
		StudyUID: d.UID(s.StudyUID), FrameOfReference: d.UID(s.FrameOfReference),
		PatientName: label, PatientID: label,
		IdentityRemoved: true, DeidentificationWay: "dosecover: identity, dates and study identifiers removed; UIDs replaced by hashes with a random salt",
	}
	for _, u := range s.Series {
		o.Series = append(o.Series, d.UID(u))
	}
	return o
}

// Results returns the three results of an analysis as DICOM objects: the
// report (pdf, may be nil to leave it out), the dose map (CEM43 analyses
// only; otherwise left out and said in notes) and the structure set.
func Results(s *Source, c *dosemap.Case, r *review.Result, pdf []byte, title string) (objs []Object, notes []string, err error) {
	now := time.Now().UTC()
	if pdf != nil {
		o, err := ReportPDF(s, pdf, title, now)
		if err != nil {
			return nil, nil, err
		}
		objs = append(objs, o)
	}
	if r.Model == "cem43" {
		d, err := DoseMap(s, r, now)
		if err != nil {
			return nil, nil, err
		}
		objs = append(objs, d...)
	} else {
		notes = append(notes, fmt.Sprintf("no dose map: the %s model's dose is not in CEM43", r.Model))
	}
	st, err := Structures(s, c, r, now)
	if err != nil {
		return nil, nil, err
	}
	return append(objs, st), notes, nil
}

// Write writes the objects into dir (created if missing), each file
// atomically (dosemap/safefile).
func Write(dir string, objs []Object) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return &safefile.PathError{What: "creating", Path: dir, Err: err}
	}
	for _, o := range objs {
		data := o.Data
		if err := safefile.WriteFile(filepath.Join(dir, o.Name), func(w io.Writer) error {
			_, err := w.Write(data)
			return err
		}); err != nil {
			return err
		}
	}
	return nil
}

package dicomio

import (
	"fmt"
	"path/filepath"
	"sort"
	"strings"
)

// StudyInfo describes one study found in a folder: the files that share
// one StudyInstanceUID (0020,000D), DICOM PS3.3 C.7.2.1 (General Study
// Module). A review never mixes two studies: a folder that holds several is
// read only with one of them chosen (LoadOptions.Study).
type StudyInfo struct {
	UID         string `json:"uid"`
	PatientID   string `json:"patientID"`
	PatientName string `json:"patientName"`
	Date        string `json:"date"` // StudyDate as written, YYYYMMDD
	Description string `json:"description"`
	Series      int    `json:"series"` // distinct SeriesInstanceUIDs
	Files       int    `json:"files"`
	Folder      string `json:"folder"` // deepest folder holding all its files, relative to the folder read ("." itself)
	Used        bool   `json:"used"`   // the study the case is read from
}

// Label names the study for a person: UID, patient and date.
func (s StudyInfo) Label() string {
	var who []string
	if s.PatientID != "" {
		who = append(who, "ID "+s.PatientID)
	}
	if s.PatientName != "" {
		who = append(who, fmt.Sprintf("%q", s.PatientName))
	}
	patient := "patient unknown"
	if len(who) > 0 {
		patient = "patient " + strings.Join(who, " ")
	}
	date := "date unknown"
	if s.Date != "" {
		date = studyDateText(s.Date)
	}
	return fmt.Sprintf("study %s (%s, %s)", s.UID, patient, date)
}

// studyDateText writes a DA value (YYYYMMDD) as YYYY-MM-DD, or as written.
func studyDateText(d string) string {
	if len(d) == 8 && strings.Trim(d, "0123456789") == "" {
		return d[:4] + "-" + d[4:6] + "-" + d[6:]
	}
	return d
}

// NeedsStudyChoice reports whether the folder holds several studies and
// none was chosen: the case is then not read at all.
func (inv *Inventory) NeedsStudyChoice() bool {
	return len(inv.Studies) > 1 && inv.Study == ""
}

// studiesOf groups the readable files into studies, in order of study date,
// then UID. Files without a StudyInstanceUID and DICOM directories are left
// out.
func studiesOf(dir string, infos []*fileInfo, errs []error) []StudyInfo {
	byUID := map[string]*StudyInfo{}
	folder := map[string]string{}
	series := map[string]map[string]bool{}
	var order []string
	for i, fi := range infos {
		if errs[i] != nil || fi == nil || fi.StudyUID == "" || fi.SOPClass == "1.2.840.10008.1.3.10" {
			continue
		}
		s := byUID[fi.StudyUID]
		if s == nil {
			s = &StudyInfo{UID: fi.StudyUID}
			byUID[fi.StudyUID] = s
			series[fi.StudyUID] = map[string]bool{}
			order = append(order, fi.StudyUID)
		}
		s.Files++
		d := filepath.Dir(fi.Path)
		if f, ok := folder[fi.StudyUID]; !ok {
			folder[fi.StudyUID] = d
		} else {
			for f != d && !strings.HasPrefix(d, f+string(filepath.Separator)) && f != filepath.Dir(f) {
				f = filepath.Dir(f)
			}
			folder[fi.StudyUID] = f
		}
		if fi.SeriesUID != "" {
			series[fi.StudyUID][fi.SeriesUID] = true
		}
		if s.PatientID == "" {
			s.PatientID = fi.Patient.ID
		}
		if s.PatientName == "" {
			s.PatientName = fi.Patient.Name
		}
		if s.Date == "" {
			s.Date = fi.Patient.StudyDate
		}
		if s.Description == "" {
			s.Description = fi.StudyDescription
		}
	}
	out := make([]StudyInfo, 0, len(order))
	for _, uid := range order {
		s := byUID[uid]
		s.Series = len(series[uid])
		s.Folder = "."
		if r, err := filepath.Rel(dir, folder[uid]); err == nil {
			s.Folder = r
		}
		out = append(out, *s)
	}
	sort.SliceStable(out, func(a, b int) bool {
		if out[a].Date != out[b].Date {
			return out[a].Date < out[b].Date
		}
		return out[a].UID < out[b].UID
	})
	return out
}

// chooseStudy decides which study of the folder the case is read from and
// marks the files of every other study as not used. It returns false when
// no case can be read: several studies and none chosen, or the chosen one
// absent (the Inventory then says why and how to choose).
func (cr *caseReader) chooseStudy(infos []*fileInfo, errs []error) bool {
	inv := cr.inv
	inv.Studies = studiesOf(cr.dir, infos, errs)
	want := strings.TrimSpace(cr.opt.Study)
	list := func() string {
		parts := make([]string, len(inv.Studies))
		for n, s := range inv.Studies {
			parts[n] = s.Label()
		}
		return strings.Join(parts, "; ")
	}
	switch {
	case want == "" && len(inv.Studies) <= 1:
		if len(inv.Studies) == 1 {
			inv.Study = inv.Studies[0].UID
		}
	case want == "":
		inv.NotReviewable = fmt.Sprintf("the folder holds %d studies and a review never mixes studies: %s; choose one with --study UID (the window offers a chooser)", len(inv.Studies), list())
		return false
	default:
		for _, s := range inv.Studies {
			if s.UID == want {
				inv.Study = want
			}
		}
		if inv.Study == "" {
			if len(inv.Studies) == 0 {
				inv.NotReviewable = fmt.Sprintf("study %s was asked for, but no file of the folder carries a StudyInstanceUID (0020,000D)", want)
			} else {
				inv.NotReviewable = fmt.Sprintf("study %s was asked for, but the folder holds only %s", want, list())
			}
			return false
		}
	}
	if inv.Study == "" {
		return true
	}
	var chosen StudyInfo
	other := map[string]StudyInfo{}
	for n, s := range inv.Studies {
		if s.UID == inv.Study {
			inv.Studies[n].Used = true
			chosen = s
		} else {
			other[s.UID] = s
		}
	}
	for i, fi := range infos {
		if errs[i] != nil || fi == nil || fi.SOPClass == "1.2.840.10008.1.3.10" {
			continue
		}
		switch {
		case fi.StudyUID == inv.Study:
			continue
		case fi.StudyUID == "" && !(fi.IsImage || fi.Structures != nil):
			continue // not used anyway; assemble says why
		case fi.StudyUID == "":
			errs[i] = skip("no StudyInstanceUID (0020,000D) while the case is %s: not used, so that no two studies are mixed", chosen.Label())
		default:
			errs[i] = skip("belongs to another %s, not to the chosen study: not used", other[fi.StudyUID].Label())
		}
	}
	return true
}

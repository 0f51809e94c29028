package deid

import (
	"fmt"
	"sort"
	"strings"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// firstString returns the first value of the top-level string attribute t
// of ds, trimmed, or "".
func firstString(ds *dicom.Dataset, t tag.Tag) string {
	e, err := ds.FindElementByTag(t)
	if err != nil {
		return ""
	}
	if v, ok := e.Value.GetValue().([]string); ok && len(v) > 0 {
		return strings.TrimSpace(strings.TrimRight(v[0], "\x00 "))
	}
	return ""
}

// oneStudy keeps the files of one study (StudyInstanceUID (0020,000D),
// DICOM PS3.3 C.7.2.1): want, or the only study of the folder. Files of
// other studies, and files without a StudyInstanceUID beside a study that
// has one, are added to res.Skipped with the reason. Several studies and no
// want, or a want that is absent, is an error naming every study.
func oneStudy(paths []string, sets []dicom.Dataset, want string, res *Result) ([]string, []dicom.Dataset, error) {
	type study struct{ uid, patient, date string }
	found := map[string]*study{}
	uids := make([]string, len(sets))
	for n := range sets {
		uid := firstString(&sets[n], tag.StudyInstanceUID)
		uids[n] = uid
		if uid != "" && found[uid] == nil {
			found[uid] = &study{uid: uid, patient: firstString(&sets[n], tag.PatientID), date: firstString(&sets[n], tag.StudyDate)}
		}
	}
	var list []string
	for _, s := range found {
		list = append(list, fmt.Sprintf("study %s (patient ID %q, date %q)", s.uid, s.patient, s.date))
	}
	sort.Strings(list)
	switch {
	case want == "" && len(found) <= 1:
		for uid := range found {
			want = uid
		}
	case want == "":
		return nil, nil, fmt.Errorf("the folder holds %d studies and a copy never mixes studies: %s; choose one with --study UID", len(found), strings.Join(list, "; "))
	case found[want] == nil:
		return nil, nil, fmt.Errorf("study %s was asked for, but the folder holds %s", want, strings.Join(list, "; "))
	}
	if want == "" {
		return paths, sets, nil
	}
	var keepP []string
	var keepS []dicom.Dataset
	for n, uid := range uids {
		switch uid {
		case want:
			keepP, keepS = append(keepP, paths[n]), append(keepS, sets[n])
		case "":
			res.Skipped = append(res.Skipped, Skipped{Path: paths[n], Reason: "no StudyInstanceUID (0020,000D) beside study " + want + ": not copied"})
		default:
			res.Skipped = append(res.Skipped, Skipped{Path: paths[n], Reason: "belongs to study " + uid + ", not to the chosen study " + want + ": not copied"})
		}
	}
	return keepP, keepS, nil
}

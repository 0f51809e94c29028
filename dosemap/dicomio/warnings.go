package dicomio

import (
	"fmt"
	"strings"
)

// Warnings returns what a user analysing the case should know about the
// reading, one line each: the DICOM files that were not used (with the
// first reasons; files that are not DICOM at all, such as notes, are only
// counted) and every problem found. Nil when the case was read cleanly.
func (inv *Inventory) Warnings() []string {
	var out []string
	var dicom []SkippedFile
	other := 0
	for _, s := range inv.Skipped {
		if strings.HasPrefix(s.Reason, "not a DICOM file") {
			other++
			continue
		}
		dicom = append(dicom, s)
	}
	if len(dicom) > 0 {
		const show = 3
		var first []string
		for n, s := range dicom {
			if n == show {
				break
			}
			first = append(first, s.Path+": "+s.Reason)
		}
		line := fmt.Sprintf("%d files of %s were not used: %s", len(dicom), inv.Dir, strings.Join(first, "; "))
		if len(dicom) > show {
			line += fmt.Sprintf("; and %d more (dosecover inspect lists them all)", len(dicom)-show)
		}
		if other > 0 {
			line += fmt.Sprintf(" (%d other files are not DICOM)", other)
		}
		out = append(out, line)
	}
	return append(out, inv.Problems...)
}

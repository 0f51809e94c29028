package view

import (
	"math"
	"sort"
	"strings"

	"dosecover/dosemap"
)

// orientationTol is the smallest direction-cosine component that earns a
// letter in an oblique label (about 3°; common practice).
const orientationTol = 0.05

// OrientationLabel returns the letters naming the patient direction d (LPS)
// as shown at the edges of a view: L or R along x (+x patient left), P or A
// along y (+y posterior), S or I along z (+z superior). Up to maxLetters
// letters are given, the most dominant component first, leaving out
// components below 0.05; maxLetters 1 gives the dominant axis only, which
// is what the view edges show.
//
// The letters follow DICOM PS3.3 C.7.6.1.1.1 (Patient Orientation), which
// orders the letters of an oblique direction by the size of their
// components; that attribute writes H (head) and F (foot) where displays
// conventionally write S and I (common practice); PatientOrientation gives
// the attribute's form.
func OrientationLabel(d dosemap.Vec3, maxLetters int) string {
	return letters(d, maxLetters, [3][2]string{{"L", "R"}, {"P", "A"}, {"S", "I"}})
}

// PatientOrientation returns direction d in the letters of the DICOM
// Patient Orientation attribute (0020,0020) for bipeds, PS3.3 C.7.6.1.1.1:
// L/R, P/A, H/F, every component of at least 0.05 in order of size.
func PatientOrientation(d dosemap.Vec3) string {
	return letters(d, 3, [3][2]string{{"L", "R"}, {"P", "A"}, {"H", "F"}})
}

func letters(d dosemap.Vec3, maxLetters int, names [3][2]string) string {
	d = d.Unit()
	idx := []int{0, 1, 2}
	sort.SliceStable(idx, func(a, b int) bool { return math.Abs(d[idx[a]]) > math.Abs(d[idx[b]]) })
	var sb strings.Builder
	for n, a := range idx {
		if n >= maxLetters || (n > 0 && math.Abs(d[a]) < orientationTol) {
			break
		}
		if d[a] == 0 && n == 0 {
			return ""
		}
		if d[a] > 0 {
			sb.WriteString(names[a][0])
		} else {
			sb.WriteString(names[a][1])
		}
	}
	return sb.String()
}

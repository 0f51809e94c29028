package dicomio

import (
	"math"
	"strconv"
	"strings"

	"dosecover/dosemap"

	"github.com/suyashkumar/dicom/pkg/tag"
)

// checkPlanes checks the image-plane attributes of every frame of an image
// (PS3.3 C.7.6.2): PixelSpacing present and positive, ImageOrientationPatient
// present and made of two perpendicular unit vectors, ImagePositionPatient
// present. es is the top-level data set, whose values the messages quote.
// The error says which attribute is missing or what is wrong with its value.
func checkPlanes(es elems, frames []frameMeta) error {
	for _, f := range frames {
		if math.IsNaN(f.TE) {
			return skip("implausible %s %s ms: want %g to %g ms", tagName(tagEffectiveEchoTime), strconv.FormatFloat(f.badTE, 'g', -1, 64), minTEms, maxTEms)
		}
		if f.Spacing[0] > maxSpacingMM || f.Spacing[1] > maxSpacingMM || math.IsInf(f.Spacing[0], 0) || math.IsInf(f.Spacing[1], 0) {
			return skip("implausible %s %s mm: want positive spacings up to %g mm", tagName(tag.PixelSpacing), joinValues(f.Spacing[:]), maxSpacingMM)
		}
		if !finite(f.Thickness) || f.Thickness < 0 || f.Thickness > maxSpacingMM {
			return skip("implausible %s %s mm: want 0 to %g mm", tagName(tag.SliceThickness), strconv.FormatFloat(f.Thickness, 'g', -1, 64), maxSpacingMM)
		}
		if !finite(f.Slope) || !finite(f.Intercept) || math.Abs(f.Slope) > maxMapping || math.Abs(f.Intercept) > maxMapping {
			return skip("implausible rescale: %s %g, %s %g", tagName(tag.RescaleSlope), f.Slope, tagName(tag.RescaleIntercept), f.Intercept)
		}
		for _, r := range f.RWV {
			if !finite(r.Slope) || !finite(r.Intercept) || r.Slope == 0 || math.Abs(r.Slope) > maxMapping || math.Abs(r.Intercept) > maxMapping {
				return skip("implausible real-world value mapping: %s %g, %s %g", tagName(tagRWVSlope), r.Slope, tagName(tagRWVIntercept), r.Intercept)
			}
		}
		for _, v := range []dosemap.Vec3{f.Row, f.Col} {
			if !finite(v[0]) || !finite(v[1]) || !finite(v[2]) {
				vals, _ := es.floats(tag.ImageOrientationPatient)
				return skip("implausible %s %s: want six finite numbers", tagName(tag.ImageOrientationPatient), joinValues(vals))
			}
		}
		if f.IPP[0] == f.IPP[0] && !(math.Abs(f.IPP[0]) <= maxPositionMM && math.Abs(f.IPP[1]) <= maxPositionMM && math.Abs(f.IPP[2]) <= maxPositionMM) {
			return skip("implausible %s %s mm: want coordinates within %g mm of the origin", tagName(tag.ImagePositionPatient), joinValues(f.IPP[:]), maxPositionMM)
		}
		if !(f.Spacing[0] > 0 && f.Spacing[1] > 0) {
			if v, ok := es.floats(tag.PixelSpacing); ok {
				return skip("%s is %s mm: both spacings must be positive", tagName(tag.PixelSpacing), joinValues(v))
			}
			return skip("missing tag %s", tagName(tag.PixelSpacing))
		}
		if f.Row.Norm() == 0 || f.Col.Norm() == 0 {
			if v, ok := es.floats(tag.ImageOrientationPatient); ok {
				return skip("%s is %s: a direction is zero or the value count is not 6", tagName(tag.ImageOrientationPatient), joinValues(v))
			}
			return skip("missing tag %s", tagName(tag.ImageOrientationPatient))
		}
		if f.IPP[0] != f.IPP[0] {
			if v, ok := es.floats(tag.ImagePositionPatient); ok {
				return skip("%s is %s: want 3 numbers", tagName(tag.ImagePositionPatient), joinValues(v))
			}
			return skip("missing tag %s", tagName(tag.ImagePositionPatient))
		}
	}
	// The stored orientation (frames hold it normalised): unit vectors
	// within 1 % and perpendicular within about 0.6°, looser than
	// rounding to the 16 characters of a DS value needs.
	if v, ok := es.floats(tag.ImageOrientationPatient); ok && len(v) == 6 {
		r := math.Sqrt(v[0]*v[0] + v[1]*v[1] + v[2]*v[2])
		c := math.Sqrt(v[3]*v[3] + v[4]*v[4] + v[5]*v[5])
		if math.Abs(r-1) > 0.01 || math.Abs(c-1) > 0.01 {
			return skip("%s is %s: the row and column directions must be unit vectors (lengths %.3g and %.3g)", tagName(tag.ImageOrientationPatient), joinValues(v), r, c)
		}
		if dot := (v[0]*v[3] + v[1]*v[4] + v[2]*v[5]) / (r * c); math.Abs(dot) > 0.01 {
			return skip("%s is %s: the row and column directions are not perpendicular (%.1f° apart)", tagName(tag.ImageOrientationPatient), joinValues(v), math.Acos(math.Max(-1, math.Min(1, dot)))*180/math.Pi)
		}
	}
	return nil
}

// joinValues writes a multi-valued number as DICOM does, "a\b\c".
func joinValues(v []float64) string {
	s := make([]string, len(v))
	for n, x := range v {
		s[n] = strconv.FormatFloat(x, 'g', -1, 64)
	}
	return strings.Join(s, `\`)
}
